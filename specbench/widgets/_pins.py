"""Pinned estimates: kept on screen for comparison, labelled by what sets them apart.

A pin holds the full-resolution results and the settings that made them.  Its label
(unless the user gave one) is built from the settings that differ between the pins, so
it says what the comparison is about: ``segment_length=4096, window=hamming``.  Each pin
keeps the colour and dash it was given while it lives; a removed pin's style is reused.

:class:`Pins` is the Workbench's part that owns them: pin / remove / clear (from code and
from the pin table's buttons), the labels and styles, and the refusals it reports through
the session's problems.
"""

from __future__ import annotations

import contextlib
import html
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import ipywidgets as W

from .._errors import SpecbenchError
from ._merit import spectrum_merits
from ._session import Problem
from ._status import guarded
from ._style import DASH_ARRAY, MARKER_STROKE, PIN_MARKER, PIN_STYLES, STROKE_MARKERS, gapped, marker_path

__all__ = ["Pin", "Pins", "PinBoard", "MAX_PINS", "settings_of", "auto_labels"]

MAX_PINS = len(PIN_STYLES)
_LABEL_CHARS = 72


@dataclass
class Pin:
    """One pinned estimate (every analysis that had a result on screen).

    Attributes
    ----------
    label : str
        Shown in the pin table; built from the differing settings unless given.
    estimators, results : dict
        Analysis name -> estimator and full-resolution result (of the analysed channel).
    shown : dict
        Analysis name -> the part of the result its view draws.
    channel, span, fs
        The data selection: channel name, span in seconds (None: whole record) and
        the effective sample rate.
    color, line_style, marker
        How the pin is drawn in every view: its colour, dash pattern and the marker shape
        drawn at a few points along its line (each pin's (dash, marker) pair is its own).
    estimator, correlation_estimator, spectrum, correlation
        The PSD and autocorrelation entries of the dicts (None when not pinned).
    """

    label: str
    estimators: dict
    results: dict
    shown: dict
    channel: str
    span: tuple[float, float] | None
    fs: float
    color: str
    line_style: str
    user_label: bool = False
    settings: dict = field(default_factory=dict, repr=False)

    @property
    def marker(self) -> str | None:
        return PIN_MARKER.get(self.color)

    @property
    def estimator(self) -> Any:
        return self.estimators.get("psd")

    @property
    def correlation_estimator(self) -> Any:
        return self.estimators.get("acf")

    @property
    def spectrum(self) -> Any:
        return self.results.get("psd")

    @property
    def correlation(self) -> Any:
        return self.results.get("acf")

    @property
    def _spectrum1(self) -> Any:
        return self.shown.get("psd")

    @property
    def _correlation1(self) -> Any:
        return self.shown.get("acf")

    @property
    def main_estimator(self) -> Any:
        return next(iter(self.estimators.values()))


def _short(v: Any) -> str:
    if isinstance(v, tuple) and v and isinstance(v[0], str):  # a window with parameters
        return f"{v[0]}({', '.join(f'{a:g}' if isinstance(a, float) else str(a) for a in v[1:])})"
    if isinstance(v, float):
        return f"{v:g}"
    if isinstance(v, tuple):
        return "(" + ", ".join(_short(a) for a in v) + ")"
    return str(v)


def settings_of(session) -> dict[str, Any]:
    """Everything that makes a pin, by control key: methods, fields, data selection."""
    out: dict[str, Any] = {}
    for slot in session.slots.values():
        if slot.result is None:
            continue
        est = slot.est
        if len(slot.analysis.classes()) > 1:
            out[slot.analysis.method_key()] = type(est).kind
        for name in est.params():
            out.setdefault(session.key_of(slot, name), getattr(est, name))
    sel = session.sel
    out["channel"] = sel.channel
    out["span"] = sel.span
    out["fs"] = session.main.result.fs if session.main.result is not None else None
    return out


def auto_labels(settings: list[dict[str, Any]], estimators: list[Any]) -> list[str]:
    """Labels from the settings that differ between pins (all of them, for one pin)."""
    keys: list[str] = []
    for s in settings:
        keys += [k for k in s if k not in keys]
    differing = [k for k in keys if len({repr(s.get(k, "—")) for s in settings}) > 1]
    labels = []
    for s, est in zip(settings, estimators):
        if differing:
            parts = [f"{k}={_short(s[k])}" if k in s else f"{k}=—" for k in differing]
            if "method" in differing:
                parts = [s["method"]] + [p for p in parts if not p.startswith("method=")]
            text = ", ".join(parts)
        else:
            est = getattr(est, "main_estimator", est)
            changed = est.changed_fields()
            text = type(est).kind + (" " + ", ".join(f"{k}={_short(v)}" for k, v in changed.items()) if changed else "")
        labels.append(text if len(text) <= _LABEL_CHARS else text[: _LABEL_CHARS - 1] + "…")
    return labels


def swatch(color: str, dash: str, marker: str | None = None) -> str:
    """The pin's look as drawn in the views: a short line in its dash, its marker in the middle."""
    mark = ""
    if marker is not None:
        paint = (f"fill='none' stroke='{color}' stroke-width='{MARKER_STROKE}'" if marker in STROKE_MARKERS
                 else f"fill='{color}'")
        mark = f"<path transform='translate(17,6)' d='{marker_path(marker)}' {paint}/>"
    return (f"<svg width='34' height='12'><line x1='1' y1='6' x2='33' y2='6' stroke='{color}' "
            f"stroke-width='2.2' stroke-dasharray='{DASH_ARRAY[dash]}'/>{mark}</svg>")


class PinBoard:
    """The pin buttons and the pin table (CSS classes ``sb-pins``, ``sb-pin-button``)."""

    def __init__(self, on_pin: Callable[[], None], on_remove: Callable[[int], None],
                 on_clear: Callable[[], None]) -> None:
        self.pin_button = W.Button(description="Pin this estimate", icon="thumb-tack",
                                   tooltip="Keep the current estimate on both views for comparison.")
        self.pin_button.add_class("sb-pin-button")
        self.clear_button = W.Button(description="Remove all", tooltip="Remove every pin.")
        self.clear_button.add_class("sb-pin-clear")
        self.pin_button.on_click(lambda _: on_pin())
        self.clear_button.on_click(lambda _: on_clear())
        self._on_remove = on_remove
        self.count = W.HTML()
        self.table = W.VBox()
        self.table.add_class("sb-pin-table")
        head = gapped(W.HBox([self.pin_button, self.clear_button, self.count],
                             layout=W.Layout(align_items="center")), "small")
        self.widget = W.VBox([head, self.table])
        self.widget.add_class("sb-pins")
        self.show([])

    def show(self, pins: list[Pin]) -> None:
        self.count.value = f"<span class='sb-muted'>{len(pins)} of {MAX_PINS} pins</span>"
        self.clear_button.disabled = not pins
        rows = []
        for i, p in enumerate(pins):
            spec = p.shown.get("psd")
            m = {x.key: x.text for x in spectrum_merits(spec)} if spec is not None else {}
            summary = " · ".join(f"{k} {html.escape(m[key])}" for k, key in (
                ("res", "resolution"), ("dof", "dof"), ("band", "band_db"), ("Parseval", "parseval")) if key in m)
            data = f"channel {p.channel}"
            if p.span is not None:
                data += f", span {p.span[0]:g}–{p.span[1]:g} s"
            data += f", fs {p.fs:g} Hz"
            info = W.HTML(
                f"<div style='display:flex;gap:10px;align-items:baseline;flex-wrap:wrap'>"
                f"{swatch(p.color, p.line_style, p.marker)}<b>{html.escape(p.label)}</b>"
                f"<span class='sb-muted'>{summary}</span></div>"
                f"<div class='sb-pin-settings'>"
                f"{' · '.join(html.escape(repr(e)) for e in p.estimators.values())} · {html.escape(data)}</div>",
                layout=W.Layout(flex="1 1 auto"),
            )
            remove = W.Button(description="", icon="times",  # never squeezed below its icon by a long label
                              layout=W.Layout(width="46px", min_width="46px", flex="0 0 46px"),
                              tooltip=f"Remove the pin {p.label}")
            remove.add_class("sb-pin-remove")
            remove.on_click(lambda _, i=i: self._on_remove(i))
            row = W.HBox([info, remove], layout=W.Layout(width="100%"))
            row.add_class("sb-pin-row")
            rows.append(row)
        self.table.children = rows


class Pins:
    """The pins of a Workbench: what is pinned, its table, and pin / remove / clear.

    ``redraw()`` redraws the views (their pin marks); ``report()`` refreshes the status line
    after the session's problems changed.  Methods called from code raise
    :class:`~specbench.SpecbenchError` (and say so in the status line); the table's buttons
    never raise.
    """

    def __init__(self, session, redraw: Callable[[], None], report: Callable[[], None]) -> None:
        self._session = session
        self._redraw = redraw
        self._report = report
        self.items: list[Pin] = []
        ui = guarded(session, report)
        self.board = PinBoard(ui(self._pin_from_ui), ui(self.remove), ui(self.clear))

    def _free_style(self) -> tuple[str, str]:
        used = {(p.color, p.line_style) for p in self.items}
        return next(s for s in PIN_STYLES if s not in used)

    def _relabel(self) -> None:
        auto = auto_labels([p.settings for p in self.items], [p.main_estimator for p in self.items])
        for p, label in zip(self.items, auto):
            if not p.user_label:
                p.label = label

    def _changed(self) -> None:
        self.board.show(self.items)
        self._redraw()
        self._report()

    def pin(self, label: str | None = None) -> Pin:
        s = self._session
        if s.main.result is None:
            msg = ("There is no estimate on screen to pin yet: no setting has given one. Fix the setting "
                   "the status line names first.")
            s.errors["nopin"] = Problem(msg)
            self._report()
            raise SpecbenchError(msg)
        if len(self.items) >= MAX_PINS:
            msg = (f"{MAX_PINS} pins are on screen, the most the views can tell apart. Remove one "
                   "(× in the pin table) or all of them before pinning another.")
            s.errors["pins"] = Problem(msg)
            self._report()
            raise SpecbenchError(msg)
        s.errors.pop("pins", None)
        color, dash = self._free_style()
        on = [slot for slot in s.slots.values() if s.current(slot)]  # not a view of an earlier selection
        p = Pin(
            label=label or "", estimators={x.name: x.est for x in on}, results={x.name: x.result for x in on},
            shown={x.name: x.shown for x in on}, channel=s.sel.channel, span=s.sel.span, fs=s.main.result.fs,
            color=color, line_style=dash, user_label=bool(label), settings=settings_of(s),
        )
        self.items.append(p)
        self._relabel()
        self._changed()
        return p

    def remove(self, which: int | str | Pin) -> None:
        if isinstance(which, Pin):
            idx = next((i for i, p in enumerate(self.items) if p is which), None)
        elif isinstance(which, str):
            idx = next((i for i, p in enumerate(self.items) if p.label == which), None)
        else:
            idx = int(which) if -len(self.items) <= int(which) < len(self.items) else None
        if idx is None:
            raise SpecbenchError(f"No pin {which!r}; the pins are {[p.label for p in self.items]}.")
        del self.items[idx]
        self._session.errors.pop("pins", None)
        self._relabel()
        self._changed()

    def clear(self) -> None:
        self.items.clear()
        self._session.errors.pop("pins", None)
        self._changed()

    def _pin_from_ui(self) -> None:
        with contextlib.suppress(SpecbenchError):  # the message is in the status line
            self.pin()
