"""The PSD view's measurements and the advise panel in a real JupyterLab at 1400 px, light and
dark theme: drag a band with the band tool, type a band, read the measurements table, click a
tone to centre on it, set harmonic cursors, propose settings and apply one.

The record is an invented scenario: a shaft tone at 37.2 Hz (peak amplitude 0.4 m/s^2) with
two harmonics on white noise; a sine of amplitude A has RMS A / sqrt(2) (common practice).
"""

from __future__ import annotations

import re

from test_workbench_e2e import notebook, use_theme

CELL = """\
import numpy as np
import specbench as sb

fs = 2000.0
t = np.arange(200_000) / fs
rng = np.random.default_rng(7)
x = (0.05 * rng.standard_normal(t.size) + 0.4 * np.sin(2 * np.pi * 37.2 * t)
     + 0.12 * np.sin(2 * np.pi * 74.4 * t) + 0.05 * np.sin(2 * np.pi * 111.6 * t))
bench = sb.Workbench(sb.Signal(x, fs=fs, unit="m/s^2", channels=["shaft"]))
bench"""

TABLE = ".sb-measure-table"


def _table_text(lab) -> str:
    return lab.page.locator(TABLE).first.inner_text()


def _row_after(text: str, label: str) -> str:
    """The table's text from ``label`` to the next line break of its row (cells are tab/newline separated)."""
    i = text.index(label)
    return " ".join(text[i:i + 200].split())


def test_band_table_tones_and_advise(lab):
    lab.open(notebook(CELL), "measure.ipynb")
    lab.run_all()
    lab.wait_for(f"{TABLE} .sb-tone-button")
    page = lab.page
    psd = page.locator(".sb-view-psd").first
    # the tones: 37.2 Hz strongest, RMS 0.4 / sqrt(2) = 0.2828
    first_tone = page.locator(".sb-tone-button").first.inner_text()
    assert abs(float(first_tone.split()[0]) - 37.2) < 0.01, first_tone
    assert "0.28" in _row_after(_table_text(lab), first_tone)
    assert re.search(r"peak 37\.(19|20)\d* ± [0-9.e+-]+ Hz 0\.28", psd.locator(".sb-measure-readout").inner_text())
    assert not [m for m in lab.console if "NaN" in m], "no mark draws NaN coordinates"
    lab.screenshot("0-light-psd-with-peak", show=".sb-view-psd")

    # drag a band with the band tool
    psd.locator(".widget-toggle-buttons button", has_text=re.compile(r"^band$")).click()
    # the brush is drawn by the front end once the kernel has sent the new interaction
    page.wait_for_function("() => !!document.querySelector('.sb-view-psd .bqplot .brushintsel')")
    box = psd.locator(".bqplot").first.bounding_box()
    y = box["y"] + box["height"] * 0.5
    page.mouse.move(box["x"] + box["width"] * 0.55, y)
    page.mouse.down()
    page.mouse.move(box["x"] + box["width"] * 0.65, y, steps=8)
    page.mouse.up()
    page.wait_for_function("() => parseFloat(document.querySelector('.sb-view-psd .sb-band-hi input').value) > 0")
    page.wait_for_function("() => /Band RMS\\s+[0-9]/.test(document.querySelector('.sb-measure-table').innerText)")
    dragged = _row_after(_table_text(lab), "Band RMS")
    lo = float(psd.locator(".sb-band-lo input").input_value())
    hi = float(psd.locator(".sb-band-hi input").input_value())
    assert 0 < lo < hi < 1000, (lo, hi)
    lab.screenshot("1-light-dragged-band", show=".sb-view-psd")

    # type a band: 150..250 Hz holds only noise (white, sigma 0.05: RMS 0.05 sqrt(2 * 100 / fs) = 0.0158)
    psd.locator(".sb-band-lo input").fill("150")
    psd.locator(".sb-band-lo input").press("Enter")
    psd.locator(".sb-band-hi input").fill("250")
    psd.locator(".sb-band-hi input").press("Enter")
    psd.locator(".sb-band-set").click()
    page.wait_for_function("() => document.querySelector('.sb-measure-table').innerText.includes('150 – 250 Hz')")
    typed = _row_after(_table_text(lab), "Band RMS")
    assert typed != dragged
    value = float(re.search(r"Band RMS\s+([0-9.e+-]+)", typed).group(1))
    assert 0.0140 < value < 0.0178, typed
    assert re.search(r"95% \[[0-9.e+-]+, [0-9.e+-]+\]", typed), typed
    lab.screenshot("2-light-table", show=TABLE)

    # harmonics of the strongest tone, then centre on the second tone
    count = psd.locator(".sb-harmonic-count input")
    count.fill("3")
    count.press("Enter")
    page.wait_for_function("() => document.querySelector('.sb-measure-table').innerText.includes('3×')")
    second = page.locator(".sb-tone-button").nth(1)
    second_text = second.inner_text()
    second.click()
    freq = second_text.split()[0]
    # the read tool reads at the tone (its nearest bin) once the view is centred on it
    page.wait_for_function(
        """(f) => [...document.querySelectorAll('.sb-view-psd .sb-readout')].some(e => {
            const m = /^([0-9.]+) Hz/.exec(e.innerText.trim()); return m && Math.abs(parseFloat(m[1]) - f) < 3; })""",
        arg=float(freq))
    ticks = psd.locator(".bqplot .axis text").all_inner_texts()
    assert ticks, "the zoomed view has ticks"
    lab.screenshot("3-light-centred-on-tone", show=".sb-view-psd")

    # advise: targets, propose, apply the first candidate
    adv = page.locator(".sb-advise").first
    adv.locator(".sb-advise-resolution input").fill("1")
    adv.locator(".sb-advise-resolution input").press("Enter")
    adv.locator(".sb-advise-band input").fill("2")
    adv.locator(".sb-advise-band input").press("Enter")
    adv.locator(".sb-advise-run").click()
    adv.locator(".sb-advise-apply").first.wait_for()
    # the trade-off chart: a bqplot figure, whose view may render after the buttons (it did,
    # once, on a loaded CI machine)
    adv.locator(".sb-advise-figure").first.wait_for()
    assert adv.locator(".sb-advise-figure").count() == 1
    chosen = adv.locator(".sb-advise-text code").first.inner_text()
    lab.screenshot("4-light-advise", show=".sb-advise")
    lab.screenshot("4b-light-advise-chart", show=".sb-advise-legend")
    adv.locator(".sb-advise-apply").first.click()
    page.wait_for_function(
        "(want) => (document.querySelector('.sb-status')?.innerText || '').includes(want)", arg=chosen)
    # the readings followed the new estimate: still a band and the tones
    page.wait_for_function("() => document.querySelector('.sb-measure-table').innerText.includes('150 – 250 Hz')")
    assert page.locator(".sb-tone-button").count() >= 1

    use_theme(lab, "JupyterLab Dark")
    try:
        lab.screenshot("5-dark-psd", show=".sb-view-psd")
        lab.screenshot("6-dark-table", show=TABLE)
        lab.screenshot("7-dark-advise", show=".sb-advise")
        lab.screenshot("7b-dark-advise-chart", show=".sb-advise-legend")
    finally:
        use_theme(lab, "JupyterLab Light")  # the theme is a server setting, shared by the tests
    assert not lab.tracebacks()
