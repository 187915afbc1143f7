"""The words an edit is listed with where no model is at hand (the restore prompt)."""

from scalesieve.recipe import Edit
from scalesieve.views.edit_words import bands_text


def test_levels_without_a_model_read_as_english_plurals():
    assert bands_text(Edit("gain", levels=(1,), gain=0.0), None) == "level 1"
    assert bands_text(Edit("region", levels=(1, 2), start_s=0.1, stop_s=0.2), None) \
        == "levels 1, 2"
    assert bands_text(Edit("threshold", levels="details", rule="universal"), None) \
        == "every detail band"
