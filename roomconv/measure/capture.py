"""Playing a sweep and recording the room: through a sound card, or a simulated device.

``sounddevice`` is imported only inside :func:`load_sounddevice`, so nothing else in roomconv
needs PortAudio.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.signal import fftconvolve

from .. import safety
from ..errors import DeviceError, InputError
from ..signal import db_to_gain

__all__ = [
    "load_sounddevice",
    "list_devices",
    "SoundCard",
    "SimulatedDevice",
    "run_measurement",
    "metered_playrec",
]


def load_sounddevice():
    """Import sounddevice, turning a missing PortAudio into a message a user can act on.

    Returns
    -------
    module
        The ``sounddevice`` module.

    Raises
    ------
    DeviceError
        When PortAudio or the sounddevice package is missing.

    Examples
    --------
    >>> sd = load_sounddevice()  # doctest: +SKIP
    >>> sd.query_devices()  # doctest: +SKIP
    """
    try:
        import sounddevice as sd  # noqa: PLC0415 - lazy on purpose
    except OSError as exc:
        raise DeviceError(
            "the PortAudio library is not installed, so no sound card can be used "
            f"({exc}); on Debian/Ubuntu: apt-get install libportaudio2"
        ) from None
    except ImportError as exc:
        raise DeviceError(
            f"the sounddevice package is missing ({exc}); pip install sounddevice"
        ) from None
    return sd


def list_devices() -> list[dict]:
    """Devices PortAudio sees, as plain dicts.

    Returns
    -------
    list of dict
        One per device: ``index`` (PortAudio's, 0-based), ``name``, ``inputs`` and ``outputs``
        (channel counts) and ``default_rate`` (Hz).

    Raises
    ------
    DeviceError
        When PortAudio or the sounddevice package is missing.

    Examples
    --------
    >>> [d["name"] for d in list_devices()]  # doctest: +SKIP
    ['default', 'USB interface']
    """
    sd = load_sounddevice()
    out = []
    for i, d in enumerate(sd.query_devices()):
        out.append(
            {
                "index": i,
                "name": d["name"],
                "inputs": d["max_input_channels"],
                "outputs": d["max_output_channels"],
                "default_rate": d["default_samplerate"],
            }
        )
    return out


@dataclass
class SoundCard:
    """A real duplex device through sounddevice's ``playrec``.

    Parameters
    ----------
    device : int or str, optional
        PortAudio device index or name; the system default when None.
    output_channel : int
        1-based output channel (as printed on interfaces) that plays the sweep.
    input_channels : tuple of int
        1-based input channels, recorded in this order.

    Examples
    --------
    >>> card = SoundCard(device="hw:1,0", output_channel=1, input_channels=(1, 2))
    >>> card.input_channels
    (1, 2)
    >>> rec = card.playrec(signal, 48000)  # doctest: +SKIP
    """

    device: int | str | None = None
    output_channel: int = 1
    input_channels: tuple[int, ...] = (1,)

    def playrec(self, signal: np.ndarray, rate: int) -> np.ndarray:
        """Play ``signal`` on the output channel and record the input channels at the same time.

        The signal is capped at :data:`~roomconv.safety.OUTPUT_CAP_DBFS` before it reaches the
        card (a last line of defence; callers check levels first).

        Parameters
        ----------
        signal : ndarray, shape (samples,)
            Playback signal, full scale = 1.
        rate : int
            Sample rate, Hz.

        Returns
        -------
        ndarray, shape (samples, len(input_channels))
            The recording, float64.

        Raises
        ------
        DeviceError
            When PortAudio finds no device or refuses the stream.

        Examples
        --------
        >>> SoundCard().playrec(np.zeros(4800), 48000).shape  # doctest: +SKIP
        (4800, 1)
        """
        sd = load_sounddevice()
        try:
            devs = sd.query_devices()
        except Exception as exc:  # PortAudio host errors are not a stable type
            raise DeviceError(f"cannot query sound devices: {exc}") from None
        if len(devs) == 0:
            raise DeviceError(
                "PortAudio found no sound device; connect an interface, or "
                "rehearse the measurement on a simulated room"
            )
        out = safety.hard_cap(np.asarray(signal, dtype=np.float64))
        try:
            rec = sd.playrec(
                out.astype(np.float32)[:, None],
                samplerate=rate,
                input_mapping=list(self.input_channels),
                output_mapping=[self.output_channel],
                device=self.device,
                dtype="float32",
                blocking=True,
            )
        except Exception as exc:
            raise DeviceError(
                f"the sound card refused the stream: {exc} (check the device, the "
                "channel numbers and the sample rate)"
            ) from None
        return np.asarray(rec, dtype=np.float64)


@dataclass
class SimulatedDevice:
    """A stand-in sound card: the output passes through a known room and a recording chain.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, mics)
        The room's response from loudspeaker to each microphone.
    latency_samples : int
        Converter round-trip delay added to every input channel, samples.
    noise_dbfs : float
        Level (RMS, dBFS) of stationary white noise added to the microphone channels.
    loopback : bool
        Append a loopback channel (the output, delayed by the latency) after the microphones.
    distortion : tuple of float
        Coefficients (a2, a3) of a memoryless loudspeaker nonlinearity x + a2·x² + a3·x³.
    seed : int
        Seed of the noise generator (the same seed gives the same recording).
    noise : ndarray, shape (samples,), optional
        Coloured noise to add instead of white noise, repeated as needed.

    Examples
    --------
    >>> dev = SimulatedDevice(ir=np.array([0.0, 0.5]), latency_samples=3, loopback=True,
    ...                       noise_dbfs=-np.inf)
    >>> rec = dev.playrec(np.array([1.0, 0.0, 0.0, 0.0, 0.0, 0.0]), 48000)
    >>> rec[:, 0].tolist(), rec[:, 1].tolist()
    ([0.0, 0.0, 0.0, 0.0, 0.5, 0.0], [0.0, 0.0, 0.0, 1.0, 0.0, 0.0])
    """

    ir: np.ndarray
    latency_samples: int = 0
    noise_dbfs: float = -100.0
    loopback: bool = False
    distortion: tuple[float, float] = (0.0, 0.0)
    seed: int = 0
    noise: np.ndarray | None = None  # optional coloured noise (samples,), repeated as needed

    def playrec(self, signal: np.ndarray, rate: int) -> np.ndarray:
        """Play ``signal`` through the simulated chain and return what the inputs record.

        Parameters
        ----------
        signal : ndarray, shape (samples,)
            Playback signal, full scale = 1.
        rate : int
            Sample rate, Hz (used for nothing but the interface's sake: the room is given in
            samples).

        Returns
        -------
        ndarray, shape (samples, mics [+ 1 loopback])
            The recording, as long as ``signal``, float64.

        Examples
        --------
        >>> SimulatedDevice(ir=np.ones((4, 2))).playrec(np.zeros(100), 48000).shape
        (100, 2)
        """
        x = np.asarray(signal, dtype=np.float64)
        a2, a3 = self.distortion
        driven = x
        if a2 or a3:
            # Apply the polynomial at 4× the rate and filter back down, as the converter's
            # anti-alias filter would: harmonics above Nyquist must not fold into the band.
            from scipy.signal import resample_poly  # noqa: PLC0415

            up = resample_poly(x, 4, 1)
            driven = resample_poly(up + a2 * up**2 + a3 * up**3, 1, 4)[: x.size]
        ir = np.asarray(self.ir, dtype=np.float64)
        ir = ir[:, None] if ir.ndim == 1 else ir
        n = x.size
        mics = fftconvolve(driven[:, None], ir, axes=0)[:n]
        rng = np.random.default_rng(self.seed)
        if self.noise is not None:
            reps = int(np.ceil(n / self.noise.size))
            mics = mics + np.tile(self.noise, reps)[:n, None]
        elif np.isfinite(self.noise_dbfs):
            mics = mics + db_to_gain(self.noise_dbfs) * rng.standard_normal(mics.shape)
        chans = [mics]
        if self.loopback:
            chans.append(x[:, None])
        rec = np.concatenate(chans, axis=1)
        d = int(self.latency_samples)
        if d:
            rec = np.concatenate([np.zeros((d, rec.shape[1])), rec[:-d]])
        return rec


def run_measurement(
    device,
    playback: np.ndarray,
    rate: int,
    *,
    tail_s: float = 0.5,
    level_cap_dbfs: float = safety.OUTPUT_CAP_DBFS,
) -> np.ndarray:
    """Play ``playback`` plus ``tail_s`` of silence and return the recording.

    The caller must have shown the caution text (:func:`roomconv.safety.caution_text`) and had
    it confirmed before calling this with a real sound card.

    Parameters
    ----------
    device : SoundCard or SimulatedDevice
        Anything with ``playrec(signal, rate)``.
    playback : ndarray, shape (samples,)
        The signal to play, full scale = 1.
    rate : int
        Sample rate, Hz.
    tail_s : float
        Silence appended so the room's decay is recorded, s.
    level_cap_dbfs : float
        Refuse playback whose peak is above this, dBFS.

    Returns
    -------
    ndarray, shape (samples + tail, channels)
        The recording.

    Raises
    ------
    InputError
        When the playback peak is above ``level_cap_dbfs``.

    Examples
    --------
    >>> dev = SimulatedDevice(ir=np.array([1.0]), noise_dbfs=-np.inf)
    >>> run_measurement(dev, np.full(480, 0.5), 48000, tail_s=0.01).shape
    (960, 1)
    """
    x = np.asarray(playback, dtype=np.float64).reshape(-1)
    peak = float(np.max(np.abs(x))) if x.size else 0.0
    if peak > safety.db_to_gain(level_cap_dbfs) + 1e-12:
        raise InputError(
            f"playback peak {20 * np.log10(peak):.1f} dBFS is above the output cap "
            f"of {level_cap_dbfs:g} dBFS"
        )
    padded = np.concatenate([x, np.zeros(int(round(tail_s * rate)))])
    return device.playrec(padded, rate)


def metered_playrec(
    device, signal: np.ndarray, rate: int, on_level, interval_s: float = 0.1
) -> np.ndarray:
    """Play and record like :func:`run_measurement`, reporting the input level as it goes.

    ``on_level(peak_dbfs, fraction)`` is called about every ``interval_s`` with the input peak
    of the last interval (dBFS) and the fraction done (0–1), for a live meter. A real card
    records in the background while this polls the part filled so far; a simulated device's
    recording is replayed interval by interval.

    Parameters
    ----------
    device : SoundCard or SimulatedDevice
    signal : ndarray, shape (samples,)
        The signal to play, full scale = 1 (capped at the output cap for a real card).
    rate : int
        Sample rate, Hz.
    on_level : callable
        ``on_level(peak_dbfs: float, fraction: float)``.
    interval_s : float
        Meter interval, s.

    Returns
    -------
    ndarray, shape (samples, channels)
        The recording.

    Examples
    --------
    >>> seen = []
    >>> dev = SimulatedDevice(ir=np.array([1.0]), noise_dbfs=-np.inf)
    >>> rec = metered_playrec(dev, np.full(9600, 0.5), 48000, lambda db, f: seen.append(f))
    >>> seen
    [0.5, 1.0]
    """
    x = np.asarray(signal, dtype=np.float64).reshape(-1)
    step = max(1, int(interval_s * rate))

    def level(seg):
        return 20 * np.log10(max(float(np.max(np.abs(seg))) if seg.size else 0.0, 1e-12))

    if isinstance(device, SoundCard):
        import time

        sd = load_sounddevice()
        try:
            rec = sd.playrec(
                safety.hard_cap(x).astype(np.float32)[:, None],
                samplerate=rate,
                input_mapping=list(device.input_channels),
                output_mapping=[device.output_channel],
                device=device.device,
                dtype="float32",
                blocking=False,
            )
        except Exception as exc:
            raise DeviceError(f"the sound card refused the stream: {exc}") from None
        t0 = time.monotonic()
        while True:
            n = min(x.size, int((time.monotonic() - t0) * rate))
            on_level(level(rec[max(0, n - step) : n]), n / x.size)
            if n >= x.size:
                break
            time.sleep(interval_s)
        sd.wait()
        return np.asarray(rec, dtype=np.float64)
    rec = device.playrec(x, rate)
    for n in range(step, rec.shape[0] + step, step):
        on_level(level(rec[n - step : n]), min(1.0, n / rec.shape[0]))
    return rec
