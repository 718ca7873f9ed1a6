"""The Workbench end to end: a real JupyterLab, the real widget, headless Chromium.

Each test opens a notebook of its own (its own kernel) on the shared server and checks
what a person sees: the SVG paths bqplot draws for the estimate, its band and the pins,
the text of the figures of merit and of the status line, the cell ``bench.freeze()``
inserts and what the copy button puts on the clipboard. Every step saves a screenshot to
tests/browser/screenshots/ (git-ignored).

Expected figures of merit come from outside the project: the Hann window's equivalent
noise bandwidth is 1.50 bins (Harris, "On the use of windows for harmonic analysis with
the discrete Fourier transform", Proc. IEEE 66(1), 1978, Table 1), so the resolution is
1.5 fs / segment length; a record of N samples holds floor((N - L) / S) + 1 segments of
length L at step S (Welch, IEEE Trans. Audio Electroacoust. 15(2), 1967).
"""

from __future__ import annotations

import json
import math
import re
import time
from dataclasses import dataclass
from pathlib import Path

import nbformat

from specbench.widgets._style import ASYMPTOTE, CURRENT, MARKER, MODEL, PIN_STYLES

EXAMPLES = Path(__file__).resolve().parents[2] / "example_notebooks"

FS = 5120.0  # the test-stand demo's rate
SAMPLES = 20 * 5120  # sb.demo("test-stand", duration=20)

BENCH_CELL = """\
import specbench as sb

bench = sb.Workbench(sb.demo("test-stand", duration=20))
bench"""

#: the header line of a frozen cell that holds the time of freezing (to the second)
FROZEN_AT = re.compile(r"(# specbench \S+, frozen )\S+\.$", re.MULTILINE)


def notebook(*sources: str) -> nbformat.NotebookNode:
    return nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(s) for s in sources])


def resolution_hz(segment_length: int) -> str:
    """Resolution of a Hann-window Welch estimate as the merit panel writes it (ENBW 1.5 bins)."""
    return f"{1.5 * FS / segment_length:.4g} Hz"


def segments(segment_length: int, overlap: float = 0.5) -> str:
    step = int(segment_length * (1 - overlap))
    return f"{(SAMPLES - segment_length) // step + 1:,}"


def without_time(code: str) -> str:
    """The frozen code with the time of freezing blanked out (two freezes differ only there)."""
    stamped = FROZEN_AT.subn(r"\1<time>.", code)
    assert stamped[1] == 1, f"no 'frozen <time>' header line in:\n{code}"
    return stamped[0]


# ------------------------------------------------------------------------ what is drawn

_MARKS_JS = """(figure) => {
    const box = (el) => {
        if (!el) return [0, 0];
        const r = el.getBoundingClientRect();
        return [r.width, r.height];
    };
    const marks = new Map();
    for (const curve of figure.querySelectorAll('g.curve')) {
        const key = curve.parentElement;
        if (!marks.has(key)) marks.set(key, []);
        const line = curve.querySelector('path.line');
        const area = curve.querySelector('path.area');
        const ls = line ? getComputedStyle(line) : null;
        const as = area ? getComputedStyle(area) : null;
        marks.get(key).push({
            line: line ? line.getAttribute('d') || '' : '',
            area: area ? area.getAttribute('d') || '' : '',
            line_box: box(line),
            area_box: box(area),
            line_opacity: ls ? parseFloat(ls.opacity) : 0,
            line_width: ls ? parseFloat(ls.strokeWidth) : 0,
            area_opacity: as && as.fill !== 'none' ? parseFloat(as.opacity) * parseFloat(as.fillOpacity) : 0,
            area_fill: as ? as.fill : 'none',
            dash: ls ? ls.strokeDasharray : 'none',
            stroke: ls ? ls.stroke : '',
        });
    }
    return [...marks.values()];
}"""


@dataclass
class Drawn:
    """One view as drawn: the band's filled area, the estimate's line, the pins' lines."""

    band: dict  # the curve holding the filled area
    line: dict  # the solid line of the estimate on screen
    pins: list[dict]  # dashed or dotted lines, one per pin
    pin_bands: list[dict] = ()  # the lighter shades of the pins' bands

    @property
    def key(self) -> tuple[str, str]:
        return self.band["area"], self.line["line"]


def _rgb(colour: str) -> str:
    """``#rrggbb`` as the browser's computed style writes it."""
    r, g, b = (int(colour[i:i + 2], 16) for i in (1, 3, 5))
    return f"rgb({r}, {g}, {b})"


def overlay_colours() -> set[str]:
    """The colours of marks that are neither an estimate nor a pin: measurement cursors, models."""
    return {_rgb(colour) for colour in (MARKER, MODEL, ASYMPTOTE)}


def curves_of(figure) -> list[dict]:
    """Every curve of the bqplot figure at locator ``figure``, measured where it is seen."""
    figure.scroll_into_view_if_needed()
    return [curve for mark in figure.evaluate(_MARKS_JS) for curve in mark]


def drawn(lab, view: str) -> Drawn:
    """Classify the marks of ``.sb-<view>`` by how they look, not by their order in the SVG."""
    curves = curves_of(lab.page.locator(f".sb-{view}").first)
    assert curves, f"no bqplot marks in .sb-{view}"
    # a band is a translucent shade (bqplot also writes an opaque, zero-area path per curve)
    shades = [c for c in curves if c["area"] and 0 < c["area_opacity"] < 1]
    lines = [c for c in curves if c["line"] and c["line_opacity"] > 0 and c["line_width"] > 0]
    # the measurement cursors and the model overlays of other analyses are drawn in colours of
    # their own (widgets/_style.py), never in the estimate's or a pin's colour: set them aside
    others = overlay_colours()
    assert not others & ({_rgb(CURRENT)} | {_rgb(c) for c, _ in PIN_STYLES}), "an overlay colour is a trace colour"
    lines = [c for c in lines if c["stroke"] not in others]
    solid = [c for c in lines if c["dash"] in ("none", "")]
    pins = [c for c in lines if c["dash"] not in ("none", "")]
    assert len(solid) == 1, f".sb-{view}: {len(solid)} solid lines, expected 1 (the estimate)"
    bands = [c for c in shades if c["area_fill"] == solid[0]["stroke"]]
    assert len(bands) == 1, f".sb-{view}: {len(bands)} shaded bands in the estimate's colour, expected 1"
    # every other shade is a pin's band: in a pin's colour, lighter than the estimate's band
    pin_bands = [c for c in shades if c is not bands[0]]
    assert {c["area_fill"] for c in pin_bands} <= {c["stroke"] for c in pins}, "a shade in no pin's colour"
    assert all(c["area_opacity"] < bands[0]["area_opacity"] for c in pin_bands), "a pin band not lighter"
    return Drawn(bands[0], solid[0], pins, pin_bands)


def assert_visible(curve: dict, part: str, what: str) -> None:
    width, height = curve[f"{part}_box"]
    assert len(curve[part]) > 200, f"{what}: the path is (almost) empty"
    assert width > 100 and height > 20, f"{what}: drawn {width:.0f} x {height:.0f} px"


def wait_redrawn(lab, view: str, before: Drawn) -> None:
    """Wait until the estimate's line of ``view`` differs from ``before``'s."""
    lab.page.wait_for_function(
        """([selector, old]) => [...document.querySelectorAll(selector + ' path.line')]
            .some(p => getComputedStyle(p).strokeDasharray === 'none' &&
                       getComputedStyle(p).opacity !== '0' && (p.getAttribute('d') || '') !== old &&
                       (p.getAttribute('d') || '').length > 200)""",
        arg=[f".sb-{view}", before.line["line"]],
    )


def merit(lab, key: str) -> str:
    return lab.page.locator(f".sb-merit-{key} .sb-merit-value").text_content().strip()


def status(lab, expect: str | None = None) -> str:
    """The status line's text, once it holds ``expect`` (waited for, as the status updates
    after the plot; a read straight after an action may see the previous status)."""
    line = lab.page.locator(".sb-status").first
    if expect is not None:
        lab.page.locator(".sb-status", has_text=expect).first.wait_for()
    return line.text_content().strip()


def segment_entry(lab):
    return lab.page.locator(".sb-control-segment-length input[type=number]")


def type_segment_length(lab, value: int) -> None:
    """Type a segment length in the entry box and press Enter, as a person would."""
    entry = segment_entry(lab)
    entry.click()
    entry.fill(str(value))
    entry.press("Enter")


_CONTRAST_JS = """(selector) => {
    // WCAG 2.1 relative luminance and contrast ratio (W3C, Web Content Accessibility
    // Guidelines 2.1, 2018, definitions "relative luminance" and "contrast ratio").
    const rgb = (text) => (text.match(/[\\d.]+/g) || []).map(Number);
    const luminance = ([r, g, b]) => {
        const c = [r, g, b].map(v => v / 255).map(v => v <= 0.03928 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4);
        return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2];
    };
    const figure = document.querySelector(selector);
    let el = figure, background = null;
    while (el && !background) {
        const c = rgb(getComputedStyle(el).backgroundColor);
        if (c.length === 3 || (c.length === 4 && c[3] > 0)) background = c.slice(0, 3);
        el = el.parentElement;
    }
    background = background || [255, 255, 255];
    const texts = [...figure.querySelectorAll('.axis text')].filter(t => t.textContent.trim());
    return texts.map(t => {
        const fill = rgb(getComputedStyle(t).fill).slice(0, 3);
        if (fill.length < 3) return [t.textContent.trim(), 0];  // no plain colour: not readable
        const [a, b] = [luminance(fill), luminance(background)];
        return [t.textContent.trim(), (Math.max(a, b) + 0.05) / (Math.min(a, b) + 0.05)];
    });
}"""


def assert_axis_text_readable(lab, view: str) -> None:
    """Tick and axis labels have at least WCAG 2.1's 4.5:1 contrast against the page (SC 1.4.3)."""
    texts = lab.page.evaluate(_CONTRAST_JS, f".sb-{view}")
    assert len(texts) >= 6, f".sb-{view}: only {len(texts)} axis labels"
    poor = [(text, round(ratio, 2)) for text, ratio in texts if ratio < 4.5]
    assert not poor, f".sb-{view}: axis text with too little contrast: {poor}"


def use_theme(lab, name: str) -> None:
    """Switch JupyterLab's theme from the Settings menu, as a person would."""
    lab.page.locator(".lm-MenuBar-item", has_text=re.compile(r"^Settings$")).click()
    lab.page.locator(".lm-Menu-item", has_text=re.compile(r"^Theme")).hover()
    lab.page.get_by_role("menuitem", name=name, exact=True).click()
    light = "false" if "Dark" in name else "true"
    lab.page.wait_for_function(f"() => document.body.dataset.jpThemeLight === '{light}'")


# ------------------------------------------------------------------------ cells

_CELLS_JS = """() => [...document.querySelectorAll('.jp-Notebook .jp-Cell')].map(cell => ({
    code: cell.classList.contains('jp-CodeCell'),
    prompt: (cell.querySelector('.jp-InputArea-prompt') || {}).textContent || '',
    text: [...cell.querySelectorAll('.jp-InputArea-editor .cm-content .cm-line')]
        .map(line => line.textContent).join('\\n'),
}))"""


def cells(lab) -> list[dict]:
    """Every cell of the notebook as shown: code or not, its prompt, its editor text."""
    return lab.page.evaluate(_CELLS_JS)


def saved_cell_source(lab, path: Path, index: int | None = None, *, after: str | None = None,
                      starts: str = "", timeout: float = 30.0) -> str:
    """Source of a cell of the notebook at ``path`` once JupyterLab has saved it there: cell
    ``index``, or the cell right below the one whose source is ``after``; it waits (saving again)
    until that cell's source begins with ``starts``.

    CodeMirror renders only the lines in view, so a long cell's text is read from the file.
    """

    end = time.monotonic() + timeout
    saved_at = -math.inf
    while True:
        if time.monotonic() - saved_at > 3.0:
            lab.page.locator(".jp-Notebook").first.click(position={"x": 5, "y": 5})
            lab.page.keyboard.press("Control+s")
            saved_at = time.monotonic()
        try:
            sources = [c["source"] if isinstance(c["source"], str) else "".join(c["source"])
                       for c in json.loads(path.read_text(encoding="utf-8"))["cells"]]
        except (OSError, ValueError, KeyError):
            sources = []
        at = index
        if after is not None:
            at = sources.index(after) + 1 if after in sources else None
        if at is not None and len(sources) > at and sources[at].startswith(starts):
            return sources[at]
        assert time.monotonic() < end, f"{path.name} not saved with the cell asked for within {timeout} s"
        time.sleep(0.2)


def settled_boxes(lab, *selectors: str, timeout: float = 10.0) -> list[dict]:
    """The boxes of the first match of each selector, measured in one frame, once they have
    stayed the same over two frames: the notebook keeps scrolling and laying out while the
    kernel runs the cells below, and two boxes measured by separate calls can come from
    different scroll positions (CI saw the two views of one row 250 px apart that way)."""
    js = """sels => sels.map(s => { const r = document.querySelector(s).getBoundingClientRect();
                               return {x: r.x, y: r.y, width: r.width, height: r.height}; })"""
    end = time.monotonic() + timeout
    last = None
    while True:
        boxes = lab.page.evaluate(js, list(selectors))
        if boxes == last or time.monotonic() > end:
            return boxes
        last = boxes
        lab.page.wait_for_timeout(250)


def code_cell_below(lab, source: str) -> dict:
    """The cell right below the code cell whose text is ``source`` (scrolled into view)."""
    shown = cells(lab)
    index = next(i for i, c in enumerate(shown) if c["code"] and c["text"] == source)
    below = lab.page.locator(".jp-Notebook .jp-Cell").nth(index + 1)
    below.scroll_into_view_if_needed()  # CodeMirror renders the lines it shows
    return cells(lab)[index + 1]


# ------------------------------------------------------------------------ the tests


def test_quickstart_runs_and_both_views_draw_with_their_bands(lab):
    lab.open(EXAMPLES / "quickstart.ipynb")
    lab.run_all()
    assert lab.tracebacks() == []

    # the first draw waits for the kernel's first imports and computes (slow on a cold CI
    # machine); this test is about what is drawn, the benchmarks are about speed
    lab.wait_for(".sb-workbench .sb-psd path.area", timeout=90_000)
    # side by side: the two views share a row (1400 px window, file browser open)
    psd_box, acf_box = settled_boxes(lab, ".sb-workbench .sb-psd", ".sb-workbench .sb-acf")
    assert abs(psd_box["y"] - acf_box["y"]) < 40 and acf_box["x"] > psd_box["x"] + psd_box["width"] - 1, (
        psd_box, acf_box)
    for view in ("psd", "acf"):
        d = drawn(lab, view)
        assert_visible(d.band, "area", f"{view} band")
        assert_visible(d.line, "line", f"{view} estimate")
        # the quickstart pins two estimates: each is a dashed or dotted overlay in both views
        assert len(d.pins) == 2, f"{view}: {len(d.pins)} pin lines"
        for pin in d.pins:
            assert_visible(pin, "line", f"{view} pin")
        assert len({pin["dash"] for pin in d.pins}) == 2 and len({pin["stroke"] for pin in d.pins}) == 2
    assert lab.page.locator(".sb-pin-row").count() == 2
    # the estimate on screen at the end is Welch(segment_length=4096)
    assert merit(lab, "resolution") == resolution_hz(4096)
    assert "Welch(segment_length=4096)" in status(lab, "Welch(segment_length=4096)")
    lab.screenshot("1-views", show=".sb-workbench .sb-psd")
    lab.screenshot("2-merits-and-pins", show=".sb-workbench .sb-pins")

    # the notebook's own figure: the band of the estimate with the demo's true PSD over it
    truth = lab.page.locator(".bqplot", has=lab.page.locator(".mainheading", has_text="true PSD"))
    assert truth.count() == 1
    curves = curves_of(truth)
    shade = [c for c in curves if c["area"] and 0 < c["area_opacity"] < 1]
    lines = [c for c in curves if c["line"] and c["line_opacity"] > 0 and c["line_width"] > 0]
    assert len(shade) == 1 and len(lines) == 1, (len(shade), len(lines))
    assert_visible(shade[0], "area", "band of the truth figure")
    assert_visible(lines[0], "line", "true PSD")
    lab.screenshot("3-band-and-truth", show='.bqplot:has(.mainheading:has-text("true PSD"))')

    # bench.freeze() inserted its code below, not executed
    freezing = "frozen = bench.freeze()  # in JupyterLab: the new cell below"
    frozen = code_cell_below(lab, freezing)
    assert frozen["code"] and frozen["text"].startswith("# Frozen spectral estimate")
    saved = saved_cell_source(lab, lab.server.root / lab.folder / "quickstart.ipynb", after=freezing,
                              starts="# Frozen spectral estimate")
    assert saved.startswith("# Frozen spectral estimate")
    assert "psd_estimator = sb.Welch(segment_length=4096)" in saved
    assert re.fullmatch(r"\[\s*\]:", frozen["prompt"].strip()), frozen["prompt"]
    lab.screenshot("4-frozen-cell")

    # the views read in both of JupyterLab's themes
    for view in ("psd", "acf"):
        assert_axis_text_readable(lab, view)
    use_theme(lab, "JupyterLab Dark")
    try:
        lab.page.wait_for_timeout(300)  # the theme's style sheet applied
        for view in ("psd", "acf"):
            assert_axis_text_readable(lab, view)
            d = drawn(lab, view)
            assert_visible(d.band, "area", f"{view} band, dark theme")
        lab.screenshot("5-dark-views", show=".sb-workbench .sb-psd")
        lab.screenshot("6-dark-merits", show=".sb-workbench .sb-merit")
    finally:
        use_theme(lab, "JupyterLab Light")  # the theme is a server setting, shared by the tests


def test_segment_length_change_redraws_the_psd_and_the_figures_of_merit(lab):
    lab.open(notebook(BENCH_CELL), "segment.ipynb")
    lab.run_all()
    lab.wait_for(".sb-psd path.area")
    before = drawn(lab, "psd")
    assert_visible(before.band, "area", "psd band")
    assert merit(lab, "resolution") == resolution_hz(1024)
    assert merit(lab, "segments") == segments(1024)
    lab.screenshot("1-before", show=".sb-psd")

    with lab.timed("slider to redraw"):
        handle = lab.wait_for(".sb-control-segment-length .noUi-handle")
        handle.focus()
        handle.press("ArrowRight")  # the next power of two: 2048
        wait_redrawn(lab, "psd", before)
        lab.page.locator(".sb-merit-resolution", has_text=resolution_hz(2048)).wait_for()

    after = drawn(lab, "psd")
    assert after.line["line"] != before.line["line"]
    assert after.band["area"] != before.band["area"]  # the band follows (wider: fewer dof)
    assert_visible(after.band, "area", "psd band after the change")
    assert merit(lab, "segments") == segments(2048)
    assert segment_entry(lab).input_value() == "2048"
    assert "Welch(segment_length=2048)" in status(lab, "Welch(segment_length=2048)")
    lab.screenshot("2-after", show=".sb-psd")
    lab.screenshot("3-merits", show=".sb-merit")


def test_a_pin_adds_an_overlay_in_both_views(lab):
    lab.open(notebook(BENCH_CELL), "pins.ipynb")
    lab.run_all()
    lab.wait_for(".sb-psd path.area")
    first = {view: drawn(lab, view) for view in ("psd", "acf")}
    assert all(not d.pins for d in first.values())

    with lab.timed("pin"):
        lab.page.locator(".sb-pin-button").first.click()
        lab.page.locator(".sb-pin-row").first.wait_for()
        lab.page.wait_for_function(
            "() => [...document.querySelectorAll('.sb-acf path.line')]"
            ".some(p => getComputedStyle(p).strokeDasharray !== 'none' && (p.getAttribute('d') || '').length > 200)"
        )
    for view in ("psd", "acf"):
        d = drawn(lab, view)
        assert len(d.pins) == 1, f"{view}: {len(d.pins)} pin lines after one pin"
        assert_visible(d.pins[0], "line", f"{view} pin")
        assert len(d.pin_bands) == 1, f"{view}: the pin keeps its band"
        assert_visible(d.pin_bands[0], "area", f"{view} pin band")
        # the pin lies on the estimate it pinned
        assert d.pins[0]["line"] == d.line["line"]
    lab.screenshot("1-one-pin", show=".sb-psd")

    with lab.timed("change and pin again"):
        handle = lab.wait_for(".sb-control-segment-length .noUi-handle")
        handle.focus()
        handle.press("ArrowLeft")  # 512
        lab.page.locator(".sb-merit-resolution", has_text=resolution_hz(512)).wait_for()
        wait_redrawn(lab, "psd", first["psd"])
        moved = drawn(lab, "psd")
        assert len(moved.pins) == 1 and moved.pins[0]["line"] != moved.line["line"]
        lab.page.locator(".sb-pin-button").first.click()
        lab.page.wait_for_function("() => document.querySelectorAll('.sb-pin-row').length === 2")
        lab.page.wait_for_function(
            "() => [...document.querySelectorAll('.sb-psd path.line')]"
            ".filter(p => getComputedStyle(p).strokeDasharray !== 'none' && p.getAttribute('d') && "
            f"!{json.dumps(sorted(overlay_colours()))}.includes(getComputedStyle(p).stroke)).length === 2"
        )
    for view in ("psd", "acf"):
        d = drawn(lab, view)
        assert len(d.pins) == 2, f"{view}: {len(d.pins)} pin lines after two pins"
        assert d.pins[0]["dash"] != d.pins[1]["dash"] and d.pins[0]["stroke"] != d.pins[1]["stroke"]
    rows = lab.page.locator(".sb-pin-row").all_text_contents()
    assert any("1024" in row for row in rows) and any("512" in row for row in rows), rows

    # a third setting: both pins now lie off the estimate on screen
    before = drawn(lab, "psd")
    type_segment_length(lab, 4096)
    wait_redrawn(lab, "psd", before)
    lab.page.locator(".sb-merit-resolution", has_text=resolution_hz(4096)).wait_for()
    d = drawn(lab, "psd")
    assert len(d.pins) == 2 and all(pin["line"] != d.line["line"] for pin in d.pins)
    assert len(d.pin_bands) == 2
    lab.screenshot("2-two-pins", show=".sb-psd")
    lab.screenshot("3-pin-table", show=".sb-pins")
    # the pin bands can be hidden (and shown again) from the view's toggle
    lab.page.locator(".sb-pin-band-toggle").first.click()
    for _ in range(40):  # the kernel redraws the marks
        if not drawn(lab, "psd").pin_bands:
            break
        lab.page.wait_for_timeout(250)
    assert drawn(lab, "psd").pin_bands == [] and len(drawn(lab, "psd").pins) == 2
    lab.screenshot("4-pin-bands-hidden", show=".sb-psd")


def test_an_invalid_setting_shows_its_message_and_the_last_plot_stays(lab):
    lab.open(notebook(BENCH_CELL), "invalid.ipynb")
    lab.run_all()
    lab.wait_for(".sb-psd path.area")
    good = drawn(lab, "psd")
    good_resolution = merit(lab, "resolution")

    with lab.timed("invalid entry"):
        type_segment_length(lab, 200_000)  # longer than the 102,400 samples of the record
        lab.wait_for(".sb-status.sb-status-error")
    message = status(lab, "Not applied:")
    assert message.startswith("Not applied:"), message
    assert "200000" in message.replace(",", "") and "102400" in message.replace(",", ""), message
    assert lab.page.locator(".sb-control-segment-length.sb-invalid").count() == 1
    lab.page.wait_for_timeout(300)  # a redraw, if one were (wrongly) on its way
    kept = drawn(lab, "psd")
    assert kept.key == good.key, "the plot changed although the setting was refused"
    assert merit(lab, "resolution") == good_resolution
    assert lab.tracebacks() == []  # the message is in the widget, not a traceback
    lab.screenshot("1-refused", show=".sb-status")
    lab.screenshot("2-refused-controls", show=".sb-control-segment-length")

    with lab.timed("valid entry"):
        type_segment_length(lab, 4096)
        wait_redrawn(lab, "psd", good)
        lab.page.locator(".sb-merit-resolution", has_text=resolution_hz(4096)).wait_for()
    assert lab.page.locator(".sb-status.sb-status-error").count() == 0
    assert lab.page.locator(".sb-control-segment-length.sb-invalid").count() == 0
    assert "Welch(segment_length=4096)" in status(lab, "Welch(segment_length=4096)")
    lab.screenshot("3-fixed", show=".sb-psd")


FREEZE_CELL = """\
from pathlib import Path

bench.flush()  # the noise model, fitted in the background, on screen first
frozen = bench.freeze()
_ = Path("frozen.py").write_text(frozen)
_ = Path("code.py").write_text(bench.code())"""


def test_freeze_inserts_a_cell_below_holding_bench_code(lab):
    lab.open(notebook(BENCH_CELL, FREEZE_CELL), "freeze.ipynb")
    ran = lab.run_all()
    assert ran == 2
    lab.page.wait_for_function("() => document.querySelectorAll('.jp-Notebook .jp-CodeCell').length === 3")
    folder = lab.server.root / lab.folder
    returned = (folder / "frozen.py").read_text(encoding="utf-8")
    code = (folder / "code.py").read_text(encoding="utf-8")

    inserted = code_cell_below(lab, FREEZE_CELL)
    assert inserted["code"]
    assert re.fullmatch(r"\[\s*\]:", inserted["prompt"].strip()), "the inserted cell was executed"
    # CodeMirror renders only the lines in view, so the cell's text is read from the notebook as
    # JupyterLab saves it: every character, the final newline too
    source = saved_cell_source(lab, folder / "freeze.ipynb", 2, starts="# Frozen spectral estimate")
    assert source == returned
    assert returned.startswith(inserted["text"].rstrip("\n").split("\n")[0])
    # bench.code() called a moment later writes the same cell (its time stamp may differ)
    assert without_time(source) == without_time(code)
    assert cells(lab)[-1]["code"] and len(cells(lab)) == 3  # inserted below the freezing cell
    lab.screenshot("1-inserted-cell")


COPY_CELL = """\
from pathlib import Path

bench.flush()  # the noise model, fitted in the background, on screen first
_ = Path("code.py").write_text(bench.code())"""


def test_the_copy_button_puts_the_frozen_code_on_the_clipboard(lab):
    lab.open(notebook(BENCH_CELL, COPY_CELL), "copy.ipynb")
    lab.run_all()
    code = (lab.server.root / lab.folder / "code.py").read_text(encoding="utf-8")
    lab.page.evaluate("navigator.clipboard.writeText('nothing copied yet')")
    # the noise model follows the other views in the background; code.py was written once it
    # was on screen (bench.flush() in the cell), so freeze once it is on screen here too
    lab.wait_for(".sb-view-noise .sb-term-table", timeout=120_000)

    with lab.timed("freeze and copy"):
        lab.wait_for(".sb-freeze-button").click()
        shown = lab.page.locator(".sb-freeze-code pre.sb-freeze-code-text")
        shown.filter(has_text="import specbench as sb").wait_for()
        lab.screenshot("1-frozen-code", show=".sb-freeze-panel")
        lab.page.locator("button.sb-copy-button").click()
        lab.page.locator(".sb-copy-result", has_text="Copied to the clipboard.").wait_for()
    clipboard = lab.page.evaluate("navigator.clipboard.readText()")
    assert clipboard == shown.text_content()  # the code in the box, every character
    assert without_time(clipboard) == without_time(code)
    lab.screenshot("2-copied", show=".sb-copy-result")

