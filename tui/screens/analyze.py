"""Analyze tab: pick IR files (or the session's positions), octave or third-octave bands;
see the band table with flagged values marked, warnings in plain words, the plots a
practitioner reads (energy–time curve with noise floor and truncation, smoothed magnitude
response, band decay curves with their fitted lines, T per band with its uncertainty), any
further parameters the results carry, and export the results or the study report.

Layout: the primary action and its result (status line and band table) on top; plots,
further parameters, export and study below, reached by scrolling at 80×24.
"""

from __future__ import annotations

import shlex
from pathlib import Path

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.containers import Grid, Horizontal, VerticalScroll
from textual.widgets import Button, Checkbox, DataTable, Input, Label, Select, Static
from textual.worker import get_current_worker

from roomconv.analysis.report import (
    HEADERS,
    LEGEND,
    SINGLE_NUMBER_NAMES,
    band_label,
    fmt,
    value_verdict,
)
from roomconv.analysis.study import Study
from roomconv.errors import RoomconvError
from tui.panels import ChannelLayoutPanel, SpeechPanel, TreatmentPanel
from tui.plots import DecayPlot, DecayTimePlot, EnergyTimePlot, MagnitudePlot
from tui.screens import error_text, workbench

COLUMNS = ("edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_ms", "inr_db")
#: Keys of a band row that are not parameters (what the main table and warnings show).
BAND_META = {
    "band_hz",
    "verdict",
    "verdicts",
    "warning_codes",
    "warning_codes_by_value",
    "warnings",
    "xi_range",
}
#: Keys of a position, of the document and of its average that the main views show.
POSITION_KEYS = {"file", "channel", "rate", "bands", "wideband"}
DOCUMENT_KEYS = {"positions", "average", "settings", "notes", "errors", "roomconv_version"}
AVERAGE_KEYS = {"bands", "single_numbers", "single_number_verdicts", "positions"}
#: Decay times the T-per-band plot can show.
DECAY_TIMES = (("T30", "t30_s"), ("T20", "t20_s"), ("EDT", "edt_s"))
#: Bands whose decay curves are drawn: the octave centres 125 Hz–4 kHz (more lines than
#: these cannot be told apart on a character grid).
DECAY_BANDS = (125, 250, 500, 1000, 2000, 4000)
#: Width at which the plots sit two by two, cells.
TWO_COLUMNS_FROM = 120
#: Units named by a key's ending, for parameters this tab does not know by name.
UNITS = {"_s": " s", "_ms": " ms", "_db": " dB", "_pct": " %", "_permille": " ‰", "_hz": " Hz"}


def plain_header(key: str) -> str:
    """Column header of a parameter key: the analysis' own header, else the key in words
    with its unit (``"sti"`` → ``"STI"``, ``"lateral_fraction"`` → ``"lateral fraction"``)."""
    if key in HEADERS:
        return HEADERS[key]
    for end, unit in UNITS.items():
        if key.endswith(end):
            return key[: -len(end)].replace("_", " ") + unit
    words = key.replace("_", " ")
    return words.upper() if len(words) <= 4 else words


def plain_value(key: str, value) -> str:
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        try:
            return fmt(key, value)
        except KeyError:
            return f"{value:.3g}"
    return str(value)


def _scalar(v) -> bool:
    return v is None or isinstance(v, bool | int | float | str)


def extra_band_keys(doc: dict) -> list[str]:
    """Per-band keys with plain values that the main table does not show, in first-seen
    order: whatever the analysis adds shows up here without a change to this tab."""
    keys: list[str] = []
    for p in doc.get("positions", []):
        for r in p.get("bands", []) + [p.get("wideband") or {}]:
            for k, v in r.items():
                if k in BAND_META or k in COLUMNS or k in keys:
                    continue
                if _scalar(v) and not isinstance(v, str):
                    keys.append(k)
    return keys


def extra_groups(doc: dict) -> list[str]:
    """Lines for the parameter groups beyond the band table: every single number of the
    average, then any other key of the average, of a position and of the document, their
    plain values flattened one level."""

    def flat(prefix: str, value) -> list[str]:
        if _scalar(value):
            return [f"{prefix}: {plain_value(prefix.rsplit('.', 1)[-1], value)}"]
        if isinstance(value, dict):
            out = []
            for k, v in value.items():
                if _scalar(v):
                    out.append(f"{prefix}.{k}: {plain_value(k, v)}")
                elif isinstance(v, dict | list):
                    out.append(f"{prefix}.{k}: {len(v)} item(s)")
            return out
        if isinstance(value, list):
            return [f"{prefix}: {len(value)} item(s)"]
        return []

    avg = doc.get("average", {})
    lines = []
    for k, v in (avg.get("single_numbers") or {}).items():
        if not _scalar(v):
            continue
        if k in SINGLE_NUMBER_NAMES and isinstance(v, int | float):
            name, unit, form = SINGLE_NUMBER_NAMES[k]
            lines.append(f"{name}: {form.format(v)} {unit}".rstrip())
        else:
            lines.append(f"{plain_header(k)}: {plain_value(k, v)}")
    for k, v in avg.items():
        if k not in AVERAGE_KEYS:
            lines += flat(f"average.{k}", v)
    for p in doc.get("positions", []):
        name = f"{Path(str(p.get('file', '?'))).name}:{p.get('channel', '?')}"
        for k, v in p.items():
            if k not in POSITION_KEYS:
                lines += flat(f"{name} {k}", v)
    for k, v in doc.items():
        if k not in DOCUMENT_KEYS:
            lines += flat(k, v)
    return lines


class AnalyzePane(VerticalScroll):
    DEFAULT_CSS = """
    AnalyzePane .field { height: 1; margin: 0; }
    AnalyzePane .gap { margin: 1 0 0 0; }
    AnalyzePane .field Label { width: auto; padding: 0 1 0 0; }
    AnalyzePane .field Input { width: 1fr; min-width: 16; }
    AnalyzePane .field Select { width: 22; }
    AnalyzePane .field Button { margin: 0 0 0 1; }
    AnalyzePane .field Checkbox { width: auto; height: 1; border: none; padding: 0; }
    AnalyzePane #an-status { height: auto; margin: 0; }
    AnalyzePane #an-table { height: auto; max-height: 12; }
    AnalyzePane #an-plots { layout: grid; grid-size: 1; grid-rows: 14; height: auto; }
    AnalyzePane #an-plots.-two { grid-size: 2; grid-rows: 13; grid-gutter: 0 1; }
    AnalyzePane .caption { height: auto; color: $text-muted; }
    AnalyzePane #an-more { height: auto; max-height: 12; }
    AnalyzePane .heading { text-style: bold; margin: 1 0 0 0; }
    """
    study: Study | None = None
    #: No invisible tab stop: focus goes to the fields, buttons and tables, and moving
    #: focus scrolls the pane to them.
    can_focus = False

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field"):
            yield Label("IR files")
            yield Input(placeholder="hall1.wav hall2.wav …", id="an-files", compact=True)
            yield Button("Session positions", id="an-session", compact=True)
            yield Button("Analyze", id="an-run", variant="primary", compact=True)
        with Horizontal(classes="field"):
            yield Label("Bands")
            yield Select(
                [("octave", "octave"), ("third-octave", "third")],
                value="octave",
                allow_blank=False,
                id="an-bands",
                compact=True,
            )
            yield Label(" Plots of")
            yield Select([], prompt="(analyze first)", id="an-position", compact=True)
            yield Label(" T shown")
            yield Select(
                [(n, k) for n, k in DECAY_TIMES],
                value="t30_s",
                allow_blank=False,
                id="an-metric",
                compact=True,
            )
        yield Static(
            "type IR files or take the session's positions, then Analyze",
            id="an-status",
            classes="status",
        )
        yield DataTable(id="an-table", zebra_stripes=True)
        with Grid(id="an-plots"):
            yield EnergyTimePlot(id="an-etc")
            yield MagnitudePlot(id="an-magnitude")
            yield DecayPlot(id="an-decay-plot")
            yield DecayTimePlot(id="an-t-plot")
        yield Static("", id="an-decay", classes="caption")
        yield Static("", id="an-bars", classes="caption")
        yield Static("", id="an-warnings", classes="status")
        yield Static("More parameters", classes="heading")
        yield DataTable(id="an-more", zebra_stripes=True)
        yield Static("", id="an-more-groups", classes="status")
        yield Static("Speech intelligibility (STI) — set before Analyze", classes="heading")
        yield SpeechPanel(id="an-speech")
        yield Static(
            "What the channels are (spatial and stage parameters) — set before Analyze",
            classes="heading",
        )
        yield ChannelLayoutPanel(id="an-layout")
        with Horizontal(classes="field gap"):
            yield Label("Export to")
            yield Input("analysis_out", id="an-export-dir", compact=True)
            yield Checkbox("Replace existing files", id="an-replace", compact=True)
            yield Button("Export JSON/CSV/HTML", id="an-export", compact=True)
        with Horizontal(classes="field"):
            yield Label("Study file")
            yield Input(placeholder="study.toml (roomconv study init)", id="an-study", compact=True)
            yield Button("Study report HTML+PDF", id="an-study-report", compact=True)
            yield Button("Save session as study", id="an-save-study", compact=True)

    def on_mount(self) -> None:
        t = self.query_one("#an-table", DataTable)
        t.add_columns("position", "band", *[HEADERS[c] for c in COLUMNS], "verdict")
        self.irs: dict = {}
        self._arrange()

    def on_resize(self, _event=None) -> None:
        self._arrange()

    def _arrange(self) -> None:
        self.query_one("#an-plots", Grid).set_class(self.size.width >= TWO_COLUMNS_FROM, "-two")

    def report_error(self, title: str, exc: BaseException | str) -> None:
        """Show a failed job's reason; the one place this tab reports errors from."""
        text = error_text(exc)
        # The app's status line keeps the last error (and shows it as a notice too).
        workbench(self).report(title, text, error=True)
        self.query_one("#an-status", Static).update(f"{title} failed: {text}")

    @on(Button.Pressed, "#an-session")
    def use_session(self) -> None:
        files = [str(p["file"]) for p in workbench(self).session]
        if not files:
            self.app.notify("no positions measured yet in this session", severity="warning")
            return
        self.query_one("#an-files", Input).value = " ".join(shlex.quote(f) for f in files)

    @on(Button.Pressed, "#an-run")
    def run_pressed(self) -> None:
        # The panels' settings are read here, on the interface's thread; a bad value is
        # shown (in the panel and the status line) and nothing is analysed.
        try:
            options = {
                "sti": self.query_one(SpeechPanel).conditions(),
                **self.query_one(ChannelLayoutPanel).analysis_kwargs(),
            }
        except Exception as exc:  # every failure is shown; none may end the session
            self.report_error("Analyze", exc)
            return
        self.analyse(options)

    @work(thread=True, exclusive=True, group="analyze", exit_on_error=False)
    def analyse(self, options: dict | None = None) -> None:
        from roomconv.audio import read_audio
        from roomconv.jobs.analyze import analyze_study

        app = self.app
        status = self.query_one("#an-status", Static)
        try:
            try:
                files = shlex.split(self.query_one("#an-files", Input).value)
            except ValueError as exc:
                raise RoomconvError(f"IR files: {exc} (close the quote or remove it)") from None
            if not files:
                raise RoomconvError("IR files: type one or more IR file paths first")
            bands = str(self.query_one("#an-bands", Select).value)
            app.call_from_thread(status.update, "analysing…")
            study = analyze_study([Path(f) for f in files], bands=bands, **(options or {})).study
            # The plots need the responses themselves; the analysis keeps only its curves.
            irs = {}
            for name in dict.fromkeys(str(p["file"]) for p in study.document["positions"]):
                data, _rate = read_audio(name, what="impulse response")
                for ch in range(data.shape[1]):
                    irs[(name, ch + 1)] = data[:, ch]
        except Exception as exc:  # every failure is shown; none may end the session
            app.call_from_thread(self.report_error, "Analyze", exc)
            return
        if get_current_worker().is_cancelled:
            return
        self.study = study
        self.irs = irs
        app.call_from_thread(self.show, study)

    @on(Button.Pressed, "#an-save-study")
    def save_session_study(self) -> None:
        """The session's positions as a study file (the Study file path, else study.toml in
        the export folder); an existing file is never replaced."""
        from roomconv.jobs.study import save_session_study

        if not workbench(self).session:
            self.app.notify("no positions measured yet in this session", severity="warning")
            return
        box = self.query_one("#an-study", Input)
        path = Path(
            box.value.strip() or Path(self.query_one("#an-export-dir", Input).value) / "study.toml"
        )
        positions = []
        for p in workbench(self).session:
            q = Path(p["file"]).with_name(f"{p['name']}.quality.json")
            positions.append((p["name"], p["file"], q if q.is_file() else None))
        try:
            save_session_study(path, positions)
        except Exception as exc:  # every failure is shown; none may end the session
            self.report_error("Save session", exc)
            return
        box.value = str(path)
        self.app.notify(
            f"wrote {path}: fill in the room and positions, then make the report",
            title="Save session",
        )

    @on(Button.Pressed, "#an-study-report")
    def study_report_pressed(self) -> None:
        self.study_report()

    @work(thread=True, exclusive=True, group="analyze", exit_on_error=False)
    def study_report(self) -> None:
        """Analyse the responses a study file names and write the client report (HTML and
        PDF) into the export folder; an existing report is never replaced."""
        from roomconv.errors import OutputExistsError
        from roomconv.jobs.study import report_study

        app = self.app
        status = self.query_one("#an-status", Static)
        try:
            path = self.query_one("#an-study", Input).value.strip()
            if not path:
                raise RoomconvError(
                    "type the path of a study file first ('roomconv study init' writes a template)"
                )
            folder = Path(self.query_one("#an-export-dir", Input).value)
            app.call_from_thread(status.update, f"analysing the study {path}…")
            # The job plans both report files before the work and refuses existing ones.
            res = report_study(
                path, bands=str(self.query_one("#an-bands", Select).value), report_dir=folder
            )
            if get_current_worker().is_cancelled:
                return
            study = res.results.analysis
            irs = {
                (str(p["file"]), p["channel"]): res.results.irs[p["position"]][0]
                for p in study.document["positions"]
                if p.get("position") in res.results.irs
            }
        except OutputExistsError as exc:
            app.call_from_thread(
                self.report_error, "Study report", f"{exc}; choose another export folder"
            )
            return
        except Exception as exc:  # every failure is shown; none may end the session
            app.call_from_thread(self.report_error, "Study report", exc)
            return
        self.study, self.irs = study, irs
        app.call_from_thread(self.show, study)
        app.call_from_thread(
            app.notify, "wrote " + ", ".join(str(p) for p in res.written), title="Study report"
        )

    # --- results -----------------------------------------------------------------------
    def show(self, study) -> None:
        try:
            self._show(study)
        except Exception as exc:  # a result the views cannot draw must not end the session
            self.report_error("Show results", exc)

    def _show(self, study) -> None:
        doc = study.document
        t = self.query_one("#an-table", DataTable)
        t.clear()
        for p in doc["positions"]:
            name = f"{Path(p['file']).name}:{p['channel']}"
            for r in p["bands"] + [p["wideband"]]:
                t.add_row(
                    name,
                    band_label(r["band_hz"]),
                    *[_cell(r, c) for c in COLUMNS],
                    _verdict_text(r.get("verdict", "")),
                )
        if len(doc["positions"]) > 1:
            for r in doc["average"]["bands"]:
                t.add_row(
                    "average", band_label(r["band_hz"]), *[_mean_cell(r, c) for c in COLUMNS], ""
                )
        warns = [
            w for p in doc["positions"] for r in p["bands"] + [p["wideband"]] for w in r["warnings"]
        ] + doc.get("errors", [])
        self.query_one("#an-warnings", Static).update(
            LEGEND.replace("*", "⚠")
            + "\n"
            + "\n".join(f"! {w}" for w in warns[:12])
            + (f"\n… {len(warns) - 12} more" if len(warns) > 12 else "")
        )
        sn = doc["average"]["single_numbers"]
        self.query_one("#an-status", Static).update(
            f"{len(doc['positions'])} position(s); "
            f"T30 mid {fmt('t30_s', sn.get('t30_mid_s'))} s, "
            f"EDT mid {fmt('edt_s', sn.get('edt_mid_s'))} s, "
            f"C80 mid {fmt('c80_db', sn.get('c80_mid_db'))} dB"
        )
        self._show_more(doc)
        picker = self.query_one("#an-position", Select)
        options = [
            (f"{Path(p['file']).name}:{p['channel']}", f"{i}")
            for i, p in enumerate(doc["positions"])
        ]
        with self.prevent(Select.Changed):
            picker.set_options(options)
            picker.value = "0"
        self.draw_position(0)
        self.draw_decay_times()
        self.query_one(SpeechPanel).show(doc)
        self.query_one(ChannelLayoutPanel).show(doc)
        # The Room tab's treatment planning starts from the latest measured decay times.
        for panel in self.app.query(TreatmentPanel):
            panel.set_results(doc)

    def _show_more(self, doc: dict) -> None:
        keys = extra_band_keys(doc)
        more = self.query_one("#an-more", DataTable)
        more.clear(columns=True)
        if keys:
            more.add_columns("position", "band", *[plain_header(k) for k in keys])
            for p in doc["positions"]:
                name = f"{Path(p['file']).name}:{p['channel']}"
                for r in p["bands"] + [p["wideband"]]:
                    more.add_row(
                        name,
                        band_label(r["band_hz"]),
                        *[_cell(r, k) if k in HEADERS else plain_value(k, r.get(k)) for k in keys],
                    )
        groups = extra_groups(doc)
        self.query_one("#an-more-groups", Static).update(
            "\n".join(groups) if groups else "(no further parameter groups in these results)"
        )

    @on(Select.Changed, "#an-position")
    def position_changed(self, event: Select.Changed) -> None:
        if self.study is None or event.value == Select.BLANK:
            return
        try:
            self.draw_position(int(str(event.value)))
        except Exception as exc:  # a result the views cannot draw must not end the session
            self.report_error("Plots", exc)

    @on(Select.Changed, "#an-metric")
    def metric_changed(self, _event=None) -> None:
        if self.study is None:
            return
        try:
            self.draw_decay_times()
        except Exception as exc:  # a result the views cannot draw must not end the session
            self.report_error("Plots", exc)

    def draw_position(self, index: int) -> None:
        """The energy–time curve, magnitude response and band decays of one position."""
        from roomconv.analysis.curves import band_decays, energy_time_curve, smoothed_magnitude_db

        study = self.study
        if study is None:
            return
        doc = study.document
        p = doc["positions"][index]
        label = f"{Path(p['file']).name}:{p['channel']}"
        key = (str(p["file"]), p["channel"])
        res, wide, rate = study.curves[key]
        h = self.irs.get(key)
        etc_plot = self.query_one("#an-etc", EnergyTimePlot)
        magnitude = self.query_one("#an-magnitude", MagnitudePlot)
        if h is None:
            etc_plot.clear()
            magnitude.clear()
        else:
            etc_plot.show(
                energy_time_curve(h, rate),
                truncation_s=wide.truncation_s,
                noise_db=wide.noise_db,
                label=label,
            )
            f, db = smoothed_magnitude_db(h, rate, fraction=3)
            magnitude.show([(label, f, db)])
        kind = doc["settings"]["bands"]
        shown = [r for r in res if r.band_hz is not None and _decay_band(r.band_hz, kind)]
        decays = band_decays(shown, rate)
        names = [band_label(d.band_hz) for d in decays]
        self.query_one("#an-decay-plot", DecayPlot).show(decays, names)
        self.query_one("#an-decay", Static).update(
            f"Decay curves of {label} ({', '.join(names) or 'none'}; fitted lines dotted)"
        )

    def draw_decay_times(self) -> None:
        """The chosen decay time per band, averaged over positions, ± its uncertainty (ISO
        3382-2 for T20/T30, the positions' standard deviation for EDT)."""
        if self.study is None:
            return
        doc = self.study.document
        metric = str(self.query_one("#an-metric", Select).value)
        name = dict((k, n) for n, k in DECAY_TIMES)[metric]
        rows = []
        for r in doc["average"]["bands"]:
            stat = r.get(metric) or {}
            err = stat.get("uncertainty") or stat.get("std")
            rows.append(
                (band_label(r["band_hz"]), stat.get("mean"), err, stat.get("verdict") == "caution")
            )
        self.query_one("#an-t-plot", DecayTimePlot).show(rows, name)
        text = ", ".join(
            f"{b} {fmt(metric, v)}" + (f" ± {e:.2f}" if e else "") + (" ⚠" if bad else "")
            for b, v, e, bad in rows
            if v is not None
        )
        self.query_one("#an-bars", Static).update(
            f"{name} per band (average ± uncertainty, s): {text or 'none evaluable'}"
        )

    @on(Button.Pressed, "#an-export")
    def export(self) -> None:
        from roomconv.jobs.analyze import export_study

        if self.study is None:
            self.app.notify("analyze something first", severity="warning")
            return
        folder = Path(self.query_one("#an-export-dir", Input).value)
        try:
            export_study(self.study, folder, force=self.query_one("#an-replace", Checkbox).value)
        except Exception as exc:  # every failure is shown; none may end the session
            self.report_error("Export", exc)
            return
        self.app.notify(f"exported to {folder}", title="Analyze")


def _decay_band(band_hz: float, kind: str) -> bool:
    """Whether a band's decay curve is drawn: the octave centres 125 Hz–4 kHz (in
    third-octave results, the third-octave bands at those centres)."""
    return any(abs(band_hz / b - 1) < 0.03 for b in DECAY_BANDS)


#: Cell styles: a flagged value is visibly flagged in the table itself.
_STYLE = {"caution": "bold black on dark_orange", "not evaluable": "dim"}


def _cell(row: dict, metric: str) -> Text:
    verdict = value_verdict(row, metric) if metric != "inr_db" else "ok"
    text = fmt(metric, row.get(metric))
    if verdict == "caution":
        return Text(f"{text} ⚠", style=_STYLE["caution"])
    return Text(text, style=_STYLE.get(verdict, ""))


def _mean_cell(row: dict, metric: str) -> Text:
    if metric not in row:
        return Text("—", style="dim")
    stat = row[metric]
    text = fmt(metric, stat["mean"])
    if stat.get("verdict") == "caution" and stat["mean"] is not None:
        return Text(f"{text} ⚠", style=_STYLE["caution"])
    return Text(text, style="" if stat["mean"] is not None else "dim")


def _verdict_text(verdict: str) -> Text:
    return Text(verdict, style=_STYLE.get(verdict, "green"))
