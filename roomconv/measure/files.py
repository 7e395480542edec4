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
    """Write the playback file and its ``.sweep.json`` sidecar, both planned before either is
    written.

    Parameters
    ----------
    path : str or Path
        The playback audio file (``.wav``, ``.flac``, ...); the sidecar goes beside it.
    sweep : Sweep
    subtype : str
        soundfile subtype of the audio file (``"FLOAT"``, ``"PCM_24"``, ...).
    force : bool
        Replace existing files.
    guard : WriteGuard, optional
        A caller's guard (its inputs and other outputs are checked against these two).

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    InputError
        When a target exists (without ``force``), is an input, or cannot be written.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     p = save_sweep(pathlib.Path(tmp) / "s.wav", Sweep(duration=0.2, silence_post=0.1))
    ...     sorted(f.name for f in p.parent.iterdir())
    ['s.sweep.json', 's.wav']
    """
    g = guard or WriteGuard(force=force)
    side = sidecar_path(path, "sweep")
    g.file(path)
    g.file(side)
    g.write_audio(path, sweep_signal(sweep), sweep.rate, subtype=subtype)
    g.write_json(side, sweep.to_dict())
    return Path(path)


def sweep_inputs(sweep_path) -> list[Path]:
    """The files a job reading ``sweep_path`` reads: the audio file and its sidecar's path.

    Parameters
    ----------
    sweep_path : str or Path

    Returns
    -------
    list of Path

    Examples
    --------
    >>> [p.name for p in sweep_inputs("hall/sweep.wav")]
    ['sweep.wav', 'sweep.sweep.json']
    """
    return [Path(sweep_path), sidecar_path(sweep_path, "sweep")]


def plan_extraction(guard: WriteGuard, out, *, harmonics_dir=None, json_path=None) -> None:
    """Plan every file :func:`save_extraction` writes on ``guard``, before the work starts.

    Parameters
    ----------
    guard : WriteGuard
    out : str or Path
        The impulse response file.
    harmonics_dir : str or Path, optional
        Folder for the harmonic responses ``<stem>_h<k>.wav``.
    json_path : str or Path, optional
        The quality report.

    Returns
    -------
    None

    Raises
    ------
    InputError
        When a planned target exists (unless the guard forces), clashes with an input or with
        another planned output.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from roomconv.audio import WriteGuard
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     g = WriteGuard()
    ...     d = pathlib.Path(tmp)
    ...     plan_extraction(g, d / "ir.wav", json_path=d / "q.json")
    ...     [g.planned(d / n) for n in ("ir.wav", "ir.provenance.json", "q.json", "x.wav")]
    [True, True, True, False]
    """
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
    """Read a sweep file and, when present and consistent, its sidecar.

    Parameters
    ----------
    path : str or Path
        The playback audio file written by :func:`save_sweep` (or any excitation).

    Returns
    -------
    signal : ndarray, shape (samples,)
        The first channel.
    rate : int
        Sample rate, Hz.
    sweep : Sweep or None
        The description, or None without a usable sidecar.
    note : str or None
        Why a sidecar was not used (None when it was).

    Raises
    ------
    InputError
        When the file cannot be read or the sidecar is malformed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     p = save_sweep(pathlib.Path(tmp) / "s.wav", Sweep(duration=0.2, silence_post=0.1))
    ...     sig, rate, sweep, note = load_sweep(p)
    >>> sig.size == sweep.n_total, rate, note
    (True, 48000, None)
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
    """Load a recording and a sweep file and extract the impulse response(s).

    Parameters
    ----------
    recording_path, sweep_path : str or Path
    reference_channel : int, optional
        0-based loopback channel of the recording.
    length_s : float, optional
        Length of the response, s.
    trim, harmonics, allow_clipped : bool
        As in :func:`~roomconv.measure.deconvolve.extract_ir`.

    Returns
    -------
    extraction : Extraction
    notes : list of str
        Why the sweep's sidecar was not used, when it was not.

    Raises
    ------
    InputError
        Naming the recording, for any refusal of :func:`extract_ir` or a rate mismatch.

    Examples
    --------
    >>> import tempfile, pathlib, soundfile
    >>> s = Sweep(duration=0.3, silence_pre=0.1, silence_post=0.2)
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     d = pathlib.Path(tmp)
    ...     _ = save_sweep(d / "s.wav", s)
    ...     soundfile.write(d / "rec.wav", 0.5 * sweep_signal(s), s.rate, subtype="DOUBLE")
    ...     ex, notes = extract_files(d / "rec.wav", d / "s.wav", length_s=0.1)
    >>> int(np.argmax(np.abs(ex.ir[:, 0]))), notes
    (0, [])
    """
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
    """Write the response, optional harmonic responses, quality JSON and provenance through one
    guard (every target planned before the first is written).

    Parameters
    ----------
    ex : Extraction
    out : str or Path
        The impulse response file.
    harmonics_dir : str or Path, optional
        Folder for ``<stem>_h<k>.wav``.
    json_path : str or Path, optional
        Quality report file.
    force : bool
        Replace existing files (only without ``guard``).
    inputs : iterable of path
        Files the response came from (recorded in the provenance; never overwritten).
    settings : dict, optional
        Settings recorded in the provenance.
    guard : WriteGuard, optional
        A guard on which :func:`plan_extraction` has planned these files.

    Returns
    -------
    list of Path
        The files written (the provenance sidecar not included).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from roomconv.measure.deconvolve import Extraction
    >>> ex = Extraction(ir=np.eye(4)[:, :1], rate=48000)
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     out = save_extraction(ex, pathlib.Path(tmp) / "ir.wav")
    ...     sorted(p.name for p in pathlib.Path(tmp).iterdir())
    ['ir.provenance.json', 'ir.wav']
    """
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
    """The quality report of an extraction as a short readable text block.

    Parameters
    ----------
    quality : dict
        ``Extraction.quality``.

    Returns
    -------
    str

    Examples
    --------
    >>> print(format_quality({"method": "analytic_inverse", "band_hz": [20.0, 20000.0]}))
    Quality report
      method: analytic_inverse, band [20.0, 20000.0] Hz
    """
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
