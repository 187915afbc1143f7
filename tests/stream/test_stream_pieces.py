"""One recording cut in time pieces, cleaned apart and joined: the one-process samples."""

import numpy as np
import pytest
import pywt
import soundfile as sf

from scalesieve.cli import main
from scalesieve.core import transforms as tf
from scalesieve.core.transforms import TransformSpec
from scalesieve.recipe import Edit
from scalesieve.stream.dwt import STREAM_MODES, ForwardStream, InverseStream, stretch
from scalesieve.stream.pieces import clean_pieces
from scalesieve.stream.pipeline import clean_stream


@pytest.mark.parametrize("mode", sorted(STREAM_MODES))
@pytest.mark.parametrize("wavelet,n,level", [("db4", 100_003, 7), ("haar", 5_001, 3),
                                             ("bior3.5", 77_777, 8)])
def test_stretches_joined_are_waverec_of_the_whole(mode, wavelet, n, level):
    # reference: pywt.waverec(pywt.wavedec(x)) of the whole recording
    rng = np.random.default_rng(n)
    x = rng.standard_normal(n)
    spec = TransformSpec("dwt", wavelet, level, mode)
    want = pywt.waverec(pywt.wavedec(x, wavelet, mode=mode, level=level), wavelet, mode=mode)[:n]
    cuts = sorted({0, n, *rng.integers(1, n, 3).tolist()})
    parts = []
    for o0, o1 in zip(cuts[:-1], cuts[1:]):
        first, last = stretch(n, spec, o0, o1)
        starts = [first[level]] + [first[level - i + 1] for i in range(1, level + 1)]
        outs = []
        inv = InverseStream(n, spec, lambda s0, seg: outs.append(seg.copy()), start=o0,
                            stop=o1, band_starts=starts, block=3000)
        f = ForwardStream(n, spec, inv.put, first=first, last=last)
        for s in range(first[0], last[0], 4096):
            f.feed(x[s:min(s + 4096, last[0])])
            inv.pump()
        parts.append(np.concatenate(outs))
        assert parts[-1].shape[0] == o1 - o0
    np.testing.assert_allclose(np.concatenate(parts), want, rtol=0,
                               atol=1e-12 * np.max(np.abs(want)))


def _two_channels(path, n=1_300_001):
    rng = np.random.default_rng(2)
    x = np.stack([0.1 * rng.standard_normal(n), 0.05 * rng.standard_normal(n)], axis=1)
    x[n // 2:n // 2 + 7, 1] += 0.8
    sf.write(path, x, 48_000, subtype="DOUBLE")
    return x


def test_pieces_on_local_processes_give_the_one_process_samples(tmp_path):
    src = tmp_path / "long.wav"
    _two_channels(src)
    edits = [Edit("threshold", levels="details", rule="bayes", shape="soft", noise="level"),
             Edit("region", levels=(1, 2), start_s=10.0, stop_s=12.0, gain=0.0)]
    spec = TransformSpec("dwt", "sym5", None, "reflect")
    a = clean_stream(str(src), str(tmp_path / "a.wav"), transform=spec, edits=edits,
                     removed=str(tmp_path / "ar.wav"), subtype="DOUBLE")
    b = clean_pieces(str(src), str(tmp_path / "b.wav"), workers=2, pieces=4, transform=spec,
                     edits=edits, removed=str(tmp_path / "br.wav"), subtype="DOUBLE")
    for x, y in (("a.wav", "b.wav"), ("ar.wav", "br.wav")):
        u, v = sf.read(tmp_path / x)[0], sf.read(tmp_path / y)[0]
        np.testing.assert_allclose(v, u, rtol=0, atol=1e-13)
    assert b["energy_removed_fraction"] == pytest.approx(a["energy_removed_fraction"], rel=1e-12)
    spans = [(p["start"], p["stop"]) for p in b["pieces"]]
    assert spans[0][0] == 0 and spans[-1][1] == 1_300_001 and len(spans) == 4
    assert all(p["stop"] == q["start"] for p, q in zip(b["pieces"], b["pieces"][1:]))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav", "ar.wav", "b.wav", "br.wav",
                                                          "long.wav"]


def test_pieces_on_a_dask_cluster_and_the_command_reports_them(tmp_path, capsys):
    from dask.distributed import LocalCluster

    src = tmp_path / "long.wav"
    x = _two_channels(src, n=700_001)
    with LocalCluster(host="127.0.0.1", protocol="tcp://", dashboard_address=":0",
                      n_workers=1, threads_per_worker=2, processes=False) as cluster:
        rc = main(["clean", str(src), "-o", str(tmp_path / "c.wav"), "--threshold", "universal",
                   "--subtype", "DOUBLE", "--scheduler", cluster.scheduler_address,
                   "--pieces", "2"])
    assert rc == 0
    err = capsys.readouterr().err
    assert "cleaned in 2 pieces on tcp://127.0.0.1" in err and f"0-{700_001 // 2}:" in err
    y = sf.read(tmp_path / "c.wav")[0]
    # reference: VisuShrink with PyWavelets on the whole channel (Donoho & Johnstone 1994)
    level = tf.default_level(x.shape[0], "db4")
    for k in range(2):
        c = pywt.wavedec(x[:, k], "db4", mode="symmetric", level=level)
        d1 = np.abs(c[-1])
        lam = np.median(d1[d1 != 0]) / 0.6744897501960817 * np.sqrt(2 * np.log(x.shape[0]))
        c = [c[0]] + [pywt.threshold(d, lam, mode="soft") for d in c[1:]]
        want = pywt.waverec(c, "db4", mode="symmetric")[:x.shape[0]]
        np.testing.assert_allclose(y[:, k], want, rtol=0, atol=1e-12)


@pytest.mark.parametrize("opts,why", [(["--transform", "packet", "--level", "2", "--mode",
                                        "periodic"], "boundary mode periodic")])
def test_workers_refuse_what_cannot_be_cut_in_one_line(tmp_path, capsys, opts, why):
    src = tmp_path / "in.wav"
    _two_channels(src, n=20_000)
    assert main(["clean", str(src), "-o", str(tmp_path / "o.wav"), "--zero", "1",
                 "--workers", "2", *opts]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--workers and --scheduler clean in blocks" in err[0]
    assert why in err[0]
    assert not (tmp_path / "o.wav").exists()


def test_pieces_fill_gaps_as_the_one_process_run_does(tmp_path):
    # reference: the one-process run in blocks (itself the whole-array fill, tested
    # against numpy.interp in tests/io): NaN runs inside a piece, across the cut between
    # two pieces and at the start, filled the same on every worker
    src = tmp_path / "gappy.wav"
    x = _two_channels(tmp_path / "base.wav", n=400_003)
    x[100:140, 0] = np.nan
    x[199_990:200_020, 1] = np.nan          # across the cut between pieces 1 and 2
    x[:5, 1] = np.nan
    sf.write(src, x, 48_000, subtype="DOUBLE")
    spec = TransformSpec("dwt", "db4", 6, "symmetric")
    edits = [Edit("threshold", levels="details", rule="universal", shape="soft")]
    a = clean_stream(str(src), str(tmp_path / "a.wav"), transform=spec, edits=edits,
                     subtype="DOUBLE", fill_gaps="linear")
    b = clean_pieces(str(src), str(tmp_path / "b.wav"), workers=2, pieces=2, transform=spec,
                     edits=edits, subtype="DOUBLE", fill_gaps="linear")
    u, v = sf.read(tmp_path / "a.wav")[0], sf.read(tmp_path / "b.wav")[0]
    assert not np.isnan(v).any()
    np.testing.assert_allclose(v, u, rtol=0, atol=1e-13)
    assert b["warnings"] == a["warnings"]


def test_pieces_of_a_measurement_file_give_the_one_process_samples(tmp_path, capsys):
    # an HDF5 file (h5py writes it) read by range on each worker; reference: the
    # one-process run in blocks of the same file
    h5py = pytest.importorskip("h5py")
    rng = np.random.default_rng(8)
    x = np.stack([0.1 * rng.standard_normal(300_001), 0.2 * rng.standard_normal(300_001)], 1)
    x[150_000:150_100, 0] = np.nan
    path = tmp_path / "rig.h5"
    with h5py.File(path, "w") as f:
        d = f.create_dataset("strain", data=x)
        d.attrs["rate"] = 2000.0
    args = ["--threshold", "universal", "--level", "6", "--subtype", "DOUBLE", "--fill-gaps",
            "linear", "--rate", "2000"]
    assert main(["clean", str(path), "-o", str(tmp_path / "one.wav")] + args) == 0
    one_err = capsys.readouterr().err
    assert main(["clean", str(path), "-o", str(tmp_path / "two.wav"), "--workers", "2"]
                + args) == 0
    err = capsys.readouterr().err
    assert "pieces" in err
    u, v = sf.read(tmp_path / "one.wav")[0], sf.read(tmp_path / "two.wav")[0]
    np.testing.assert_allclose(v, u, rtol=0, atol=1e-12)
    for line in one_err.splitlines():
        if "filled" in line:
            assert line in err


def test_pieces_on_a_tls_cluster_with_the_certificates_in_dasks_configuration(tmp_path,
                                                                              capsys):
    # TLS as docs/batch.md describes it: a scheduler that takes certificates signed by
    # one authority, the client's own in Dask's configuration (PEM contents here)
    import dask
    from dask.distributed import LocalCluster
    from distributed.security import Security

    src = tmp_path / "long.wav"
    _two_channels(src, n=600_000)
    sec = Security.temporary()
    args = ["clean", str(src), "-o", str(tmp_path / "t.wav"), "--zero", "1", "--pieces", "2"]
    with LocalCluster(host="127.0.0.1", protocol="tls://", security=sec, n_workers=1,
                      processes=False, dashboard_address=":0") as cluster:
        address = cluster.scheduler_address
        assert address.startswith("tls://")
        # without a certificate: one line, no file
        assert main(args + ["--scheduler", address]) == 2
        err = capsys.readouterr().err
        assert "needs this machine's certificate" in err and not (tmp_path / "t.wav").exists()
        with dask.config.set({"distributed.comm.require-encryption": True,
                              "distributed.comm.tls.ca-file": sec.tls_ca_file,
                              "distributed.comm.tls.client.cert": sec.tls_client_cert,
                              "distributed.comm.tls.client.key": sec.tls_client_key}):
            assert main(args + ["--scheduler", address]) == 0
    assert "cleaned in 2 pieces on tls://127.0.0.1" in capsys.readouterr().err
    ref = tmp_path / "ref.wav"
    assert main(["clean", str(src), "-o", str(ref), "--zero", "1"]) == 0
    np.testing.assert_allclose(sf.read(tmp_path / "t.wav")[0], sf.read(ref)[0], rtol=0,
                               atol=1e-12)


def test_a_cluster_whose_workers_cannot_see_the_input_is_refused_before_any_pass(
        tmp_path, capsys, monkeypatch):
    from dask.distributed import LocalCluster

    from scalesieve import __version__
    from scalesieve.batch import cluster as cluster_module
    from scalesieve.stream import pieces as pieces_module

    src = tmp_path / "in.wav"
    _two_channels(src, n=20_000)
    passes = []
    monkeypatch.setattr(pieces_module, "_thresholds", lambda *a: passes.append(a) or 0)
    # a worker on a machine without the shared folder (an in-process worker, so it runs this)
    monkeypatch.setattr(cluster_module, "_worker_view", lambda outdir, probe: {
        "scalesieve": __version__, "outdir": True, "input": False})
    with LocalCluster(host="127.0.0.1", protocol="tcp://", dashboard_address=":0",
                      n_workers=1, processes=False) as cluster:
        rc = main(["clean", str(src), "-o", str(tmp_path / "o.wav"), "--zero", "1",
                   "--scheduler", cluster.scheduler_address])
    assert rc == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "cannot see the input" in err[0]
    assert "at the same paths (a shared file system)" in err[0] and "--send-data" not in err[0]
    assert passes == [] and sorted(p.name for p in tmp_path.iterdir()) == ["in.wav"]
