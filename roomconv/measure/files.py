"""File-level measurement jobs shared by the CLI and the TUI: sweep files and their sidecars,
extraction from recordings on disk, and saving IRs with their quality reports.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..audio import WriteGuard, read_audio, read_json, sidecar_path, write_provenance
from ..errors import InputError, describe
from .deconvolve import HARMONIC_ORDERS, Extraction, extract_ir
from .sweep import Sweep, sweep_signal

__all__ = [
    "save_sweep",
    "load_sweep",
    "sweep_inputs",
    "plan_extraction",
    "extract_files",
    "save_extraction",
    "format_quality",
]


def save_sweep(
    path,
    sweep: Sweep,
    *,
    subtype: str = "FLOAT",
    force: bool = False,
    guard: WriteGuard | None = None,
) -> Path:
    """Write the playback WAV and its ``.sweep.json`` sidecar (both planned before either is
    written)."""
    g = guard or WriteGuard(force=force)
    side = sidecar_path(path, "sweep")
    g.file(path)
    g.file(side)
    g.write_audio(path, sweep_signal(sweep), sweep.rate, subtype=subtype)
    g.write_json(side, sweep.to_dict())
    return Path(path)


def sweep_inputs(sweep_path) -> list[Path]:
    """The files a job reading ``sweep_path`` reads: the WAV and, when present, its sidecar."""
    return [Path(sweep_path), sidecar_path(sweep_path, "sweep")]


def plan_extraction(guard: WriteGuard, out, *, harmonics_dir=None, json_path=None) -> None:
    """Plan every file :func:`save_extraction` writes, before the work starts."""
    out = Path(out)
    guard.file(out)
    guard.file(sidecar_path(out, "provenance"))
    if json_path is not None:
        guard.file(json_path)
    if harmonics_dir is not None:
        hdir = guard.folder(harmonics_dir)
        for k in HARMONIC_ORDERS:
            guard.file(hdir / f"{out.stem}_h{k}.wav")


def load_sweep(path) -> tuple[np.ndarray, int, Sweep | None, str | None]:
    """Read a sweep WAV and, when present and consistent, its sidecar.

    Returns ``(signal_1d, rate, sweep_or_None, note)``; ``note`` says why a sidecar was ignored.
    """
    data, rate = read_audio(path, what="sweep file")
    sig = data[:, 0]
    side = sidecar_path(path, "sweep")
    if not side.exists():
        return sig, rate, None, f"no sidecar {side.name}: using regularized spectral division"
    d = read_json(side, what="sweep sidecar")
    sweep = Sweep.from_dict(d, source=side)
    if sweep.rate != rate or sweep.n_total != sig.size:
        return (
            sig,
            rate,
            None,
            (
                f"sidecar {side.name} does not match the WAV (rate or length "
                "differ): using regularized spectral division"
            ),
        )
    return sig, rate, sweep, None


def extract_files(
    recording_path,
    sweep_path,
    *,
    reference_channel=None,
    length_s=None,
    trim=False,
    harmonics=True,
    allow_clipped=False,
) -> tuple[Extraction, list[str]]:
    """Load a recording and a sweep file and extract the IR(s)."""
    rec, rate = read_audio(recording_path, what="recording")
    sig, s_rate, sweep, note = load_sweep(sweep_path)
    if rate != s_rate:
        raise InputError(
            describe(
                recording_path,
                f"recorded at {rate} Hz but the sweep {Path(sweep_path).name} is at {s_rate} Hz",
                "record at the sweep's sample rate",
            )
        )
    try:
        ex = extract_ir(
            rec,
            rate,
            sweep=sweep,
            excitation=None if sweep else sig,
            reference_channel=reference_channel,
            length_s=length_s,
            harmonics=harmonics,
            trim=trim,
            allow_clipped=allow_clipped,
        )
    except InputError as exc:
        raise InputError(describe(recording_path, str(exc))) from None
    notes = [note] if note else []
    return ex, notes


def save_extraction(
    ex: Extraction,
    out,
    *,
    harmonics_dir=None,
    json_path=None,
    force: bool = False,
    inputs=(),
    settings: dict | None = None,
    guard: WriteGuard | None = None,
) -> list[Path]:
    """Write the IR, optional harmonic IRs, quality JSON and provenance through one guard
    (every target planned before the first is written); returns the written paths."""
    inputs = [Path(p) for p in inputs if Path(p).is_file()]
    out = Path(out)
    g = guard
    if g is None:  # a caller with its own guard has planned these already
        g = WriteGuard(inputs, force=force)
        plan_extraction(g, out, harmonics_dir=harmonics_dir, json_path=json_path)
    written = [g.write_audio(out, ex.ir, ex.rate)]
    if harmonics_dir is not None:
        for k in sorted(ex.harmonics):
            written.append(
                g.write_audio(
                    Path(harmonics_dir) / f"{out.stem}_h{k}.wav", ex.harmonics[k], ex.rate
                )
            )
    if json_path is not None:
        written.append(g.write_json(json_path, ex.quality))
    write_provenance(out, inputs, settings or {}, guard=g)
    return written


def format_quality(quality: dict) -> str:
    """The quality report as a short readable text block."""
    lines = ["Quality report"]
    rec = quality.get("recording", {})
    for c, pk in enumerate(rec.get("peak_dbfs", [])):
        nf = rec.get("noise_floor_dbfs")
        nf_txt = f", noise floor {nf[c]:.1f} dBFS" if nf else ""
        lines.append(
            f"  input {c}: peak {pk:.1f} dBFS, clipped samples {rec['clipped_samples'][c]}{nf_txt}"
        )
    ir = quality.get("ir", {})
    for c, inr in enumerate(ir.get("inr_db", [])):
        lines.append(
            f"  IR {c}: impulse-to-noise ratio (INR) {inr:.1f} dB, peak at sample "
            f"{ir['peak_sample'][c]}"
        )
    if "reference_latency_samples" in quality:
        lines.append(f"  loopback latency removed: {quality['reference_latency_samples']} samples")
    if "repeats" in quality:
        r = quality["repeats"]
        lines.append(
            f"  {r['count']} repeats averaged: noise down {r['snr_gain_db']:.1f} dB "
            f"(theory {r['expected_snr_gain_db']:.1f} dB), repeat mismatch "
            f"{r['repeat_mismatch_db']:.1f} dB"
        )
    lines.append(f"  method: {quality.get('method')}, band {quality.get('band_hz')} Hz")
    if quality.get("trimmed_samples"):
        lines.append(f"  trimmed {quality['trimmed_samples']} leading samples")
    for w in quality.get("warnings", []):
        lines.append(f"  warning: {w}")
    return "\n".join(lines)
