"""Analyze tab: pick IR files (or the session's positions), octave or third-octave bands, see
the band table, warnings in plain words, decay curves and bars, and export the report."""

from __future__ import annotations

import shlex
from pathlib import Path

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, VerticalScroll
from textual.widgets import Button, Checkbox, DataTable, Input, Label, Select, Static
from textual.worker import get_current_worker

from roomconv.analysis.report import HEADERS, LEGEND, band_label, fmt, value_verdict
from roomconv.errors import RoomconvError
from tui.screens import workbench

COLUMNS = ("edt_s", "t20_s", "t30_s", "c50_db", "c80_db", "d50", "ts_ms", "inr_db")


class AnalyzePane(VerticalScroll):
    study = None

    def compose(self) -> ComposeResult:
        with Horizontal(classes="row"):
            yield Label("IR files")
            yield Input(placeholder="hall1.wav hall2.wav …", id="an-files")
            yield Button("Session positions", id="an-session")
        with Horizontal(classes="row"):
            yield Label("Bands")
            yield Select(
                [("octave", "octave"), ("third-octave", "third")],
                value="octave",
                allow_blank=False,
                id="an-bands",
            )
            yield Button("Analyze", id="an-run", variant="primary")
        with Horizontal(classes="row"):
            yield Label("Export to")
            yield Input("analysis_out", id="an-export-dir")
            yield Checkbox("Replace existing files", id="an-replace")
            yield Button("Export JSON/CSV/HTML", id="an-export")
        with Horizontal(classes="row"):
            yield Label("Study file")
            yield Input(placeholder="study.toml (roomconv study init)", id="an-study")
            yield Button("Study report HTML+PDF", id="an-study-report")
            yield Button("Save session as study", id="an-save-study")
        yield Static("", id="an-status", classes="status")
        yield DataTable(id="an-table")
        yield Static("", id="an-warnings", classes="status")
        yield Static("", id="an-bars", classes="chart")
        yield Static("", id="an-decay", classes="chart")

    def on_mount(self) -> None:
        t = self.query_one("#an-table", DataTable)
        t.add_columns("position", "band", *[HEADERS[c] for c in COLUMNS], "verdict")

    @on(Button.Pressed, "#an-session")
    def use_session(self) -> None:
        files = [str(p["file"]) for p in workbench(self).session]
        if not files:
            self.app.notify("no positions measured yet in this session", severity="warning")
            return
        self.query_one("#an-files", Input).value = " ".join(shlex.quote(f) for f in files)

    @on(Button.Pressed, "#an-run")
    def run_pressed(self) -> None:
        self.analyse()

    @work(thread=True, exclusive=True, group="analyze")
    def analyse(self) -> None:
        from roomconv.jobs.analyze import analyze_study

        app = self.app
        try:
            files = shlex.split(self.query_one("#an-files", Input).value)
            if not files:
                raise RoomconvError("IR files: type one or more IR file paths first")
            bands = str(self.query_one("#an-bands", Select).value)
            app.call_from_thread(self.query_one("#an-status", Static).update, "analysing…")
            study = analyze_study([Path(f) for f in files], bands=bands).study
        except RoomconvError as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Analyze")
            app.call_from_thread(self.query_one("#an-status", Static).update, "")
            return
        if get_current_worker().is_cancelled:
            return
        self.study = study
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
        except (OSError, RoomconvError) as exc:
            self.app.notify(str(exc), severity="error", title="Save session")
            return
        box.value = str(path)
        self.app.notify(
            f"wrote {path}: fill in the room and positions, then make the report",
            title="Save session",
        )

    @on(Button.Pressed, "#an-study-report")
    def study_report_pressed(self) -> None:
        self.study_report()

    @work(thread=True, exclusive=True, group="analyze")
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
            self.study = res.results.analysis
            app.call_from_thread(self.show, res.results.analysis)
        except OutputExistsError as exc:
            app.call_from_thread(
                app.notify,
                f"{exc}; choose another export folder",
                severity="error",
                title="Study report",
            )
            return
        except (OSError, RoomconvError) as exc:
            app.call_from_thread(app.notify, str(exc), severity="error", title="Study report")
            return
        app.call_from_thread(
            app.notify, "wrote " + ", ".join(str(p) for p in res.written), title="Study report"
        )

    def show(self, study) -> None:
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
        from tui.widgets import bar_chart, decay_plot

        avg = {r["band_hz"]: r["t30_s"]["mean"] for r in doc["average"]["bands"]}
        self.query_one("#an-bars", Static).update(
            "T30 per band (average)\n" + bar_chart([(band_label(b), v) for b, v in avg.items()])
        )
        first = doc["positions"][0]
        res, _wide, rate = study.curves[(str(first["file"]), first["channel"])]
        curves = [(band_label(r.band_hz), r.curve_db, rate) for r in res]
        self.query_one("#an-decay", Static).update(
            f"Decay curves, {Path(first['file']).name}\n" + decay_plot(curves)
        )
        sn = doc["average"]["single_numbers"]
        self.query_one("#an-status", Static).update(
            f"{len(doc['positions'])} position(s); T30 mid "
            f"{fmt('t30_s', sn['t30_mid_s'])} s, EDT mid {fmt('edt_s', sn['edt_mid_s'])} s, "
            f"C80 mid {fmt('c80_db', sn['c80_mid_db'])} dB"
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
        except RoomconvError as exc:
            self.app.notify(str(exc), severity="error", title="Export")
            return
        self.app.notify(f"exported to {folder}", title="Analyze")


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
