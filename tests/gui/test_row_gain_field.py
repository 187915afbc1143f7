"""The gain field in a Scale map row header is readable at every row height.

Layout facts measured with Qt's own font metrics (QFontMetrics) and the style's own
sub-control rectangle for a spin box's text (QStyle.subControlRect): at the 14 px rows
of a 13-band DWT at 1280×800 the whole "0.0 dB" fits the field's text area.
"""

import pytest
from PySide6.QtWidgets import QApplication, QStyle, QStyleOptionSpinBox, QWidget


@pytest.fixture(autouse=True, params=["no sheet", "window sheet"])
def style(request, qapp):
    """Each test with and without the window's own style sheet (resources/style.qss),
    which sets a font size for every widget."""
    from scalesieve.gui.resource_files import style_sheet

    before = qapp.styleSheet()
    qapp.setStyleSheet(style_sheet() if request.param == "window sheet" else "")
    yield
    qapp.setStyleSheet(before)


def _header(qtbot, key, row_h):
    """A row header placed as the Scale map's column places it (setGeometry in a parent)."""
    from scalesieve.gui.row_headers import RowHeader

    column = QWidget()
    qtbot.addWidget(column)
    column.resize(390, 200)
    h = RowHeader(key, column)
    h.setGeometry(0, 0, 390, row_h)
    column.show()
    QApplication.processEvents()
    h._test_parent = column  # keep the parent (and so the header) alive
    return h


def _text_rect(field):
    opt = QStyleOptionSpinBox()
    field.initStyleOption(opt)
    return field.style().subControlRect(QStyle.ComplexControl.CC_SpinBox, opt,
                                        QStyle.SubControl.SC_SpinBoxEditField, field)


@pytest.mark.parametrize("row_h", [12, 14, 16, 18, 24, 32])
def test_the_gain_text_fits_inside_the_field_at_each_row_height(qtbot, row_h):
    h = _header(qtbot, "d1", row_h)
    h.show_band("d1", 6400.0, 12800.0, 0.01)
    h.show_gain(1.0, None)
    QApplication.processEvents()
    assert h.height() == row_h
    field = h.gain
    assert field.height() <= row_h
    assert field.geometry().bottom() < row_h and field.geometry().top() >= 0
    text = field.lineEdit().text()
    assert text == "0.0 dB"
    fm = field.lineEdit().fontMetrics()
    area = field.lineEdit().geometry()
    assert fm.height() <= area.height() + 1, (fm.height(), area.height())
    assert fm.horizontalAdvance(text) <= area.width()
    assert _text_rect(field).height() >= min(fm.height(), area.height())


def test_short_rows_drop_the_arrows_and_tall_rows_keep_them(qtbot):
    h = _header(qtbot, "d1", 14)
    assert h.gain.compact and not h.gain.hasFrame()
    h.setGeometry(0, 0, 390, 30)
    QApplication.processEvents()
    assert not h.gain.compact and h.gain.hasFrame()
    assert h.gain.styleSheet() == ""


def test_a_compact_field_still_takes_a_gain(qtbot):
    from PySide6.QtCore import Qt

    h = _header(qtbot, "d3", 14)
    h.show_gain(1.0, None)
    got = []
    h.gainChosen.connect(lambda key, g: got.append((key, g)))
    h.gain.setFocus()
    h.gain.lineEdit().selectAll()
    qtbot.keyClicks(h.gain.lineEdit(), "-6")
    qtbot.keyClick(h.gain.lineEdit(), Qt.Key.Key_Return)
    # 10^(-6/20) (definition of the decibel for amplitude)
    assert got and got[-1][0] == "d3" and abs(got[-1][1] - 10 ** (-6 / 20)) < 1e-9


def test_every_row_of_a_column_shows_its_field_alike_at_a_fractional_row_height(qtbot):
    # 21.5 px rows round to 21 and 22 px headers; all fields must take one form
    from scalesieve.gui.row_headers import RowHeaderColumn, RowHeader

    column = RowHeaderColumn()
    qtbot.addWidget(column)
    column.resize(390, 400)
    column.set_keys([f"d{i}" for i in range(1, 13)], RowHeader)
    column.show()
    column.place(0.0, 21.5)
    QApplication.processEvents()
    heights = {h.height() for h in column.headers.values()}
    assert heights == {21, 22}
    assert len({h.gain.compact for h in column.headers.values()}) == 1
    assert len({h.gain.height() for h in column.headers.values()}) == 1
