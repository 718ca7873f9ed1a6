"""The noise-model view end to end in a real JupyterLab at 1400 px, light and dark: the Allan
deviation with its band, the model curve and the asymptotes, the term table, the model over
the PSD view, and nothing wider than the widget."""

from __future__ import annotations

import nbformat
from test_layout import _OVERFLOW_JS
from test_workbench_e2e import use_theme

CELL = """\
import specbench as sb

bench = sb.Workbench(sb.demo("imu-static", duration=900))
bench"""


def test_noise_view_renders_with_its_term_table(lab):
    lab.page.set_viewport_size({"width": 1400, "height": 1000})
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(CELL)])
    lab.open(nb, "noise.ipynb")
    lab.run_all()
    lab.wait_for(".sb-view-noise .sb-term-table", timeout=120_000)
    view = ".sb-view-noise .sb-noise-adev"
    lab.wait_for(f"{view} path.area")
    # the deviation (one point per averaging time), the model curve and two asymptotes
    lines = lab.page.locator(f"{view} path.line")
    drawn = [d for d in (lines.nth(i).get_attribute("d") or "" for i in range(lines.count())) if d.count("L") > 5]
    assert len(drawn) >= 4, drawn
    # the estimate's points (one per averaging time) are drawn large enough to see: about 8 px
    # across, on both themes (they were 4 px specks, hard to find on the dark theme)
    dots = lab.page.evaluate(f"""() => [...document.querySelectorAll('{view} path.dot')]
        .map(d => d.getBoundingClientRect()).filter(r => r.width > 0).map(r => [r.width, r.height])""")
    assert dots and min(min(wh) for wh in dots) >= 7, dots
    table = lab.page.locator(".sb-view-noise .sb-term-table").first.inner_text()
    for text in ("white noise", "Gauss-Markov", "sigma", "tau", "interval"):
        assert text in table, table
    side = lab.page.locator(".sb-view-noise .sb-noise-table").first.inner_text()
    assert "Filter step dt = 0.01 s" in side and "R =" in side and "temperature, vibration or aging" in side
    texts = lab.page.evaluate(f"() => [...document.querySelectorAll('{view} text')].map(t => t.textContent.trim())")
    assert {"N", "GM"} <= set(texts), texts  # the asymptotes' labels
    # the model's PSD over the PSD view, with its toggle
    assert lab.page.locator(".sb-overlay-toggle").first.is_visible()
    for theme in ("JupyterLab Light", "JupyterLab Dark"):
        if theme != "JupyterLab Light":
            use_theme(lab, theme)
        tag = "dark" if "Dark" in theme else "light"
        found = lab.page.evaluate(_OVERFLOW_JS)
        assert not found.get("problems"), (theme, found)
        lab.screenshot(f"{tag}-noise-view", show=".sb-view-noise")
        lab.screenshot(f"{tag}-psd-with-model", show=".sb-psd")
    use_theme(lab, "JupyterLab Light")  # the theme is a server setting, shared by the tests
    assert not lab.tracebacks()
