"""Playing a sweep and recording the room: through a sound card, or a simulated device.

``sounddevice`` is imported only inside :func:`load_sounddevice`, so nothing else in roomconv
needs PortAudio.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.signal import fftconvolve

from ..errors import DeviceError, InputError
from .. import safety
from ..signal import db_to_gain


def load_sounddevice():
    """Import sounddevice, turning a missing PortAudio into a message a user can act on."""
    try:
        import sounddevice as sd  # noqa: PLC0415 - lazy on purpose
    except OSError as exc:
        raise DeviceError("the PortAudio library is not installed, so no sound card can be used "
                          f"({exc}); on Debian/Ubuntu: apt-get install libportaudio2") from None
    except ImportError as exc:
        raise DeviceError(f"the sounddevice package is missing ({exc}); "
                          "pip install sounddevice") from None
    return sd


def list_devices() -> list[dict]:
    """Devices PortAudio sees, as plain dicts (index, name, inputs, outputs, default rate)."""
    sd = load_sounddevice()
    out = []
    for i, d in enumerate(sd.query_devices()):
        out.append({"index": i, "name": d["name"], "inputs": d["max_input_channels"],
                    "outputs": d["max_output_channels"],
                    "default_rate": d["default_samplerate"]})
    return out


@dataclass
class SoundCard:
    """A real duplex device through sounddevice's ``playrec``.

    Channels are 1-based as printed on interfaces; ``output_channel`` plays the sweep,
    ``input_channels`` are recorded in that order.
    """

    device: int | str | None = None
    output_channel: int = 1
    input_channels: tuple[int, ...] = (1,)

    def playrec(self, signal: np.ndarray, rate: int) -> np.ndarray:
        sd = load_sounddevice()
        try:
            devs = sd.query_devices()
        except Exception as exc:  # PortAudio host errors are not a stable type
            raise DeviceError(f"cannot query sound devices: {exc}") from None
        if len(devs) == 0:
            raise DeviceError("PortAudio found no sound device; connect an interface, or "
                              "rehearse the measurement on a simulated room")
        out = safety.hard_cap(np.asarray(signal, dtype=np.float64))
        try:
            rec = sd.playrec(out.astype(np.float32)[:, None], samplerate=rate,
                             input_mapping=list(self.input_channels),
                             output_mapping=[self.output_channel], device=self.device,
                             dtype="float32", blocking=True)
        except Exception as exc:
            raise DeviceError(f"the sound card refused the stream: {exc} (check the device, the "
                              "channel numbers and the sample rate)") from None
        return np.asarray(rec, dtype=np.float64)


@dataclass
class SimulatedDevice:
    """A stand-in sound card: the output passes through a known room and a recording chain.

    Parameters
    ----------
    ir : ndarray, shape (taps,) or (taps, mics)
        The room's response from loudspeaker to each microphone.
    latency_samples : int
        Converter round-trip delay added to every input channel.
    noise_dbfs : float
        Level (RMS, dBFS) of stationary white noise added to the microphone channels.
    loopback : bool
        Append a loopback channel (the output, delayed by the latency) after the microphones.
    distortion : tuple of float
        Coefficients (a2, a3) of a memoryless loudspeaker nonlinearity x + a2·x² + a3·x³.
    """

    ir: np.ndarray
    latency_samples: int = 0
    noise_dbfs: float = -100.0
    loopback: bool = False
    distortion: tuple[float, float] = (0.0, 0.0)
    seed: int = 0
    noise: np.ndarray | None = None  # optional coloured noise (samples,), repeated as needed

    def playrec(self, signal: np.ndarray, rate: int) -> np.ndarray:
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


def run_measurement(device, playback: np.ndarray, rate: int, *, tail_s: float = 0.5,
                    level_cap_dbfs: float = safety.OUTPUT_CAP_DBFS) -> np.ndarray:
    """Play ``playback`` (1-D) plus ``tail_s`` of silence and return the recording.

    Refuses a signal above the output cap; the caller must have shown and confirmed the caution.
    """
    x = np.asarray(playback, dtype=np.float64).reshape(-1)
    peak = float(np.max(np.abs(x))) if x.size else 0.0
    if peak > safety.db_to_gain(level_cap_dbfs) + 1e-12:
        raise InputError(f"playback peak {20 * np.log10(peak):.1f} dBFS is above the output cap "
                         f"of {level_cap_dbfs:g} dBFS")
    padded = np.concatenate([x, np.zeros(int(round(tail_s * rate)))])
    return device.playrec(padded, rate)


def metered_playrec(device, signal: np.ndarray, rate: int, on_level, interval_s: float = 0.1
                    ) -> np.ndarray:
    """Play and record like :func:`run_measurement`, calling ``on_level(peak_dbfs, fraction)``
    about every ``interval_s`` with the input peak of the last interval, for a live meter.

    A real card records in the background while this polls the part filled so far; a
    simulated device's recording is replayed interval by interval.
    """
    x = np.asarray(signal, dtype=np.float64).reshape(-1)
    step = max(1, int(interval_s * rate))

    def level(seg):
        return 20 * np.log10(max(float(np.max(np.abs(seg))) if seg.size else 0.0, 1e-12))

    if isinstance(device, SoundCard):
        import time
        sd = load_sounddevice()
        try:
            rec = sd.playrec(safety.hard_cap(x).astype(np.float32)[:, None], samplerate=rate,
                             input_mapping=list(device.input_channels),
                             output_mapping=[device.output_channel], device=device.device,
                             dtype="float32", blocking=False)
        except Exception as exc:
            raise DeviceError(f"the sound card refused the stream: {exc}") from None
        t0 = time.monotonic()
        while True:
            n = min(x.size, int((time.monotonic() - t0) * rate))
            on_level(level(rec[max(0, n - step):n]), n / x.size)
            if n >= x.size:
                break
            time.sleep(interval_s)
        sd.wait()
        return np.asarray(rec, dtype=np.float64)
    rec = device.playrec(x, rate)
    for n in range(step, rec.shape[0] + step, step):
        on_level(level(rec[n - step:n]), min(1.0, n / rec.shape[0]))
    return rec
