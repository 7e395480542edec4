"""Treatment panel: a reverberation-time target, materials to install, the air, and the plan
per octave band from :func:`roomconv.jobs.plan.plan_treatment` (run in a worker)."""

from __future__ import annotations

import shlex
from pathlib import Path

from rich.table import Table
from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Button, Checkbox, Input, Label, Select, Static
from textual.worker import get_current_worker

from roomconv.analysis.targets import KNOWN_TARGETS
from roomconv.analysis.treatment import BASES, DECISION_CAUTION, SURFACE_NAMES
from roomconv.errors import InputError, OutputExistsError, RoomconvError
from roomconv.jobs.plan import parse_tolerance
from roomconv.synth.materials import MATERIALS
from tui.panels._text import plain

__all__ = ["TreatmentPanel"]


def _number(text: str, what: str) -> float | None:
    t = text.strip()
    if not t:
        return None
    try:
        return float(t)
    except ValueError:
        raise InputError(f"{what}: '{t}' is not a number") from None


def _tolerance(text: str) -> tuple[float, float]:
    """``LOWER,UPPER`` in % of a flat or per-band target (empty: −20 %, +20 %), read as the
    command line reads it (:func:`roomconv.jobs.plan.parse_tolerance`)."""
    t = text.strip()
    return (-20.0, 20.0) if not t else parse_tolerance(t)


def _chosen(value) -> bool:
    """Whether a Select holds a choice (not its blank prompt)."""
    return isinstance(value, str)


def _s(v) -> str:
    return "—" if v is None else f"{v:.2f}"


def _m2(v) -> str:
    return "—" if v is None else f"{v:.1f}"


def _band(b) -> str:
    return f"{b / 1000:g}k" if b >= 1000 else f"{b:g}"


class TreatmentPanel(Vertical):
    """Plan absorptive treatment towards a reverberation-time target.

    The caller gives the room (``set_room``) and the measured decay times
    (``set_results``: an analysis JSON path or an analysis document in memory).
    """

    #: The last plan shown, as plain text.
    shown_text: str = ""
    #: The status line's text.
    status_text: str = ""
    #: The last plan's result (:class:`roomconv.jobs.plan.PlanResult`), None before one.
    result = None

    DEFAULT_CSS = """
    TreatmentPanel { height: auto; }
    TreatmentPanel Horizontal { height: auto; }
    TreatmentPanel Label { padding: 1 1 0 0; }
    TreatmentPanel Input { width: 1fr; }
    TreatmentPanel .tp-short { width: 10; }
    TreatmentPanel .tp-tol { width: 14; }
    TreatmentPanel Select { width: 1fr; }
    TreatmentPanel Static { height: auto; }
    """

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._volume: float | None = None
        self._area: float | None = None
        self._results = None

    def compose(self) -> ComposeResult:
        with Horizontal():
            yield Label("Target")
            yield Input(
                placeholder="0.6  or  500:0.6,1000:0.55  or a published name", id="tp-target"
            )
            yield Select(
                [(name, name) for name in KNOWN_TARGETS],
                prompt="published target…",
                id="tp-named",
            )
        with Horizontal():
            yield Label("Install")
            yield Select([(s, s) for s in SURFACE_NAMES], prompt="surface…", id="tp-surface")
            yield Select([(m, m) for m in MATERIALS], prompt="material…", id="tp-material")
            yield Button("Add", id="tp-add")
        with Horizontal():
            yield Input(placeholder="ceiling=acoustic-tile walls=curtain-heavy", id="tp-install")
        with Horizontal():
            yield Label("Decay from")
            yield Select(
                [(b.upper(), b) for b in BASES], value="t30", allow_blank=False, id="tp-basis"
            )
            yield Label("Accepted %")
            yield Input(placeholder="-20,20", id="tp-tolerance", classes="tp-tol")
        with Horizontal():
            yield Label("Air °C")
            yield Input(placeholder="20", id="tp-temp", classes="tp-short")
            yield Label("RH %")
            yield Input(placeholder="50", id="tp-rh", classes="tp-short")
        with Horizontal():
            yield Label("Save plan as")
            yield Input(placeholder="(optional) plan.json", id="tp-json")
            yield Checkbox("Replace an existing file", id="tp-replace")
            yield Button("Plan", id="tp-plan", variant="primary")
        yield Static("", id="tp-status")
        yield Static("", id="tp-result")

    # -- what the caller gives ------------------------------------------------------------
    def set_room(
        self,
        *,
        dims_m: tuple[float, float, float] | None = None,
        volume_m3: float | None = None,
        area_m2: float | None = None,
    ) -> None:
        """The room planned for: its dimensions (L, W, H in m) or its volume and surface."""
        if dims_m is not None:
            L, W, H = (float(x) for x in dims_m)
            volume_m3 = L * W * H if volume_m3 is None else volume_m3
            area_m2 = 2 * (L * W + L * H + W * H) if area_m2 is None else area_m2
        self._volume = None if volume_m3 is None else float(volume_m3)
        self._area = None if area_m2 is None else float(area_m2)

    def set_results(self, path_or_document) -> None:
        """The measured decay times: an analysis JSON path or an analysis document."""
        self._results = path_or_document

    # -- status -----------------------------------------------------------------------------
    def set_status(self, text: str, error: bool = False) -> None:
        """One line inside the panel: progress, the file written, or what is wrong."""
        self.status_text = text
        if not self.is_mounted:  # a worker finishing after the panel was removed
            return
        self.query_one("#tp-status", Static).update(Text(text, style="bold red" if error else ""))

    # -- events ---------------------------------------------------------------------------
    @on(Select.Changed, "#tp-named")
    def _named(self, event: Select.Changed) -> None:
        if _chosen(event.value):
            self.query_one("#tp-target", Input).value = str(event.value)

    @on(Button.Pressed, "#tp-add")
    def _add(self) -> None:
        surface = self.query_one("#tp-surface", Select).value
        material = self.query_one("#tp-material", Select).value
        if not (_chosen(surface) and _chosen(material)):
            self.set_status("choose a surface and a material to add", error=True)
            return
        box = self.query_one("#tp-install", Input)
        box.value = (box.value.strip() + f" {surface}={material}").strip()

    @on(Button.Pressed, "#tp-plan")
    def _plan_pressed(self) -> None:
        self.plan()

    def plan(self) -> None:
        """Gather the fields and run the plan in a worker; bad fields show in the panel."""
        try:
            kwargs = self._request()
        except RoomconvError as exc:
            self.set_status(str(exc), error=True)
            return
        self.set_status("planning…")
        self._run(kwargs)

    def _request(self) -> dict:
        if self._results is None:
            raise InputError("no measured decay times yet: analyse responses first")
        if self._volume is None or self._area is None:
            raise InputError("the room is not known: give its size or volume and surface")
        target = self.query_one("#tp-target", Input).value.strip()
        if not target:
            raise InputError("target: type a time in seconds, BAND:SECONDS items or a name")
        try:
            install = shlex.split(self.query_one("#tp-install", Input).value)
        except ValueError as exc:
            raise InputError(f"materials to install: {exc}") from None
        json_text = self.query_one("#tp-json", Input).value.strip()
        kw = {
            "volume_m3": self._volume,
            "area_m2": self._area,
            "target": target,
            "treatments": install,
            "basis": str(self.query_one("#tp-basis", Select).value),
            "tolerance_pct": _tolerance(self.query_one("#tp-tolerance", Input).value),
            "temperature_c": _number(self.query_one("#tp-temp", Input).value, "air temperature"),
            "humidity_pct": _number(self.query_one("#tp-rh", Input).value, "relative humidity"),
            "json_path": Path(json_text) if json_text else None,
            # Only the user's own tick replaces a file; never implied.
            "force": bool(self.query_one("#tp-replace", Checkbox).value),
        }
        if isinstance(self._results, dict):
            kw["results_document"] = self._results
        else:
            kw["results_path"] = Path(self._results)
        return kw

    @work(thread=True, exclusive=True, group="treatment-plan", exit_on_error=False)
    def _run(self, kwargs: dict) -> None:
        from roomconv.jobs.plan import plan_treatment

        app = self.app
        try:
            res = plan_treatment(**kwargs)
        except OutputExistsError as exc:
            app.call_from_thread(
                self.set_status,
                f"{exc} — nothing was written; tick 'Replace an existing file' or give "
                "another name",
                True,
            )
            return
        except (RoomconvError, OSError, ValueError) as exc:
            app.call_from_thread(self.set_status, str(exc), True)
            return
        except Exception as exc:  # noqa: BLE001 - nothing typed may end the session
            app.call_from_thread(
                self.set_status, f"the plan failed unexpectedly: {type(exc).__name__}: {exc}", True
            )
            return
        if get_current_worker().is_cancelled:  # a newer plan was asked for meanwhile
            return
        app.call_from_thread(self.show_plan, res)

    # -- results --------------------------------------------------------------------------
    def show_plan(self, res) -> None:
        """The per-band table, the areas to install, the notes and the caution."""
        self.result = res
        if not self.is_mounted:
            return
        doc = res.document
        materials = [f"{a['surface']}={a['material']}" for a in doc["installed"]]
        t = Table(title=f"Plan towards {doc['target']['label']}", pad_edge=False)
        for h in ("band", "measured s", "target s", "ΔA Sabine m²", "ΔA Eyring m²"):
            t.add_column(h, justify="right")
        for a in doc["installed"]:
            t.add_column(f"{a['material']} on {a['surface']} m²", justify="right", overflow="fold")
        for h in ("predicted s", "within"):
            t.add_column(h, justify="right")
        for b in doc["bands"]:
            rng = (
                "—"
                if b["target_min_s"] is None and b["target_max_s"] is None
                else f"{_s(b['target_min_s'])}–{_s(b['target_max_s'])}"
            )
            per = {f"{a['surface']}={a['material']}": a["area_m2"] for a in b["treatment"]}
            within = {True: "yes", False: "no", None: "—"}[b["within_tolerance"]]
            t.add_row(
                _band(b["band_hz"]),
                _s(b["measured_s"]),
                rng,
                _m2(b["added_area_sabine_m2"]),
                _m2(b["added_area_eyring_m2"]),
                *(_m2(per.get(m)) for m in materials),
                _s(b["predicted_s"]),
                within,
            )
        parts: list = [t]
        for a in doc["installed"]:
            parts.append(
                Text(f"install {_m2(a['area_m2'])} m² of {a['material']} on the {a['surface']}")
            )
        mc = doc.get("mean_check")
        if mc:
            judged = (
                mc["predicted_mean_s"] if doc["checked"] == "predicted" else mc["measured_mean_s"]
            )
            verdict = {True: "within", False: "above", None: "cannot be judged"}[mc["within"]]
            parts.append(
                Text(
                    f"mean of {', '.join(_band(b) for b in mc['bands_hz'])} Hz: {_s(judged)} s "
                    f"({doc['checked']}), limit {_s(mc['limit_s'])} s: {verdict}"
                )
            )
        for b in doc["bands"]:
            for n in b.get("notes", []):
                parts.append(Text(f"  {_band(b['band_hz'])}: {n}", style="yellow"))
        for n in [*doc.get("notes", []), *res.notes]:
            if n == DECISION_CAUTION:  # said once, last, as the caution
                continue
            parts.append(Text(f"note: {n}", style="yellow"))
        parts.append(Text(f"target source: {doc['target']['source']}", style="dim"))
        parts.append(Text(f"Caution: {DECISION_CAUTION}", style="italic"))
        self.query_one("#tp-result", Static).update(_group(parts))
        self.shown_text = plain(*parts)
        # A replacement is agreed to once, for the file it was ticked for.
        self.query_one("#tp-replace", Checkbox).value = False
        self.set_status(
            "plan written to " + ", ".join(str(p) for p in res.written)
            if res.written
            else "plan shown (not saved: give a file name to save it)"
        )


def _group(parts):
    from rich.console import Group

    return Group(*parts)
