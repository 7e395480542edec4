"""SOFA response sets (AES69-2022, SOFA 2.1): what we write, read back with the netCDF4
library directly; files built by hand with netCDF4 read by our reader; bad files refused.

The expected names, dimensions and values come from the AES69-2022 convention tables of
GeneralFIR 1.0 and SingleRoomSRIR 1.1 (seen); the netCDF type codes NC_CHAR = 2 and
NC_STRING = 12 are those of netcdf.h (from memory), and the test checks its own probe by
writing one attribute of each kind first.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import glob
import os
import re
from pathlib import Path

import netCDF4
import numpy as np
import pytest
import soundfile as sf

from roomconv.audio import read_audio
from roomconv.errors import InputError
from roomconv.sofa import (
    MANDATORY_GLOBALS,
    ResponseSet,
    read_sofa,
    sofa_audio,
    write_sofa,
)
from roomconv.sofa.read import sofa_measurements

FS = 48000

#: AES69-2022 convention tables (seen): the mandatory global attributes of both conventions.
TABLE_MANDATORY = {
    "Conventions",
    "Version",
    "SOFAConventions",
    "SOFAConventionsVersion",
    "DataType",
    "RoomType",
    "Title",
    "DateCreated",
    "DateModified",
    "APIName",
    "APIVersion",
    "AuthorContact",
    "Organization",
    "License",
}


def _ir(m=3, r=2, n=257, seed=5):
    return np.random.default_rng(seed).standard_normal((m, r, n)) * 0.1


def _positions_set(m=3):
    rng = np.random.default_rng(9)
    return ResponseSet(
        ir=_ir(m, 1),
        rate_hz=FS,
        listener_m=rng.uniform(1, 5, (m, 3)),
        source_m=rng.uniform(1, 5, (m, 3)),
        listener_labels=tuple(f"R{i + 1}" for i in range(m)),
        source_labels=("S1",) * m,
        room_dimensions_m=(12.0, 8.5, 4.0),
        room_name="Test room",
        temperature_c=20.0,
        title="Study — with a non-ASCII dash",
        author="A. Person",
    )


def test_mandatory_list_matches_the_convention_tables():
    # AES69-2022 GeneralFIR 1.0 and SingleRoomSRIR 1.1 tables, flag "m" (seen).
    assert set(MANDATORY_GLOBALS) == TABLE_MANDATORY


def test_general_fir_round_trip_every_attribute_and_sample(tmp_path):
    ir = _ir()
    path = write_sofa(tmp_path / "set.sofa", ResponseSet(ir, FS, title="Round trip"))
    with netCDF4.Dataset(path) as ds:
        g = {k: ds.getncattr(k) for k in ds.ncattrs()}
        # AES69-2022 GeneralFIR 1.0 table (seen): fixed values of the read-only attributes.
        assert g["Conventions"] == "SOFA"
        assert g["Version"] == "2.1"
        assert g["SOFAConventions"] == "GeneralFIR"
        assert g["SOFAConventionsVersion"] == "1.0"
        assert g["DataType"] == "FIR"
        # RoomType: "free field, reverberant, shoebox or dae" (the same table's comment).
        assert g["RoomType"] in ("free field", "reverberant", "shoebox", "dae")
        assert g["Title"] == "Round trip"
        assert g["APIName"] == "roomconv"
        for k in TABLE_MANDATORY:
            assert isinstance(g[k], str) and g[k].strip(), k
        # Date format yyyy-mm-dd HH:MM:SS (from memory).
        assert re.fullmatch(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d", g["DateCreated"])
        assert "not known" in g["Comment"]  # positions unknown without a study
        dims = {k: len(v) for k, v in ds.dimensions.items()}
        assert dims == {"I": 1, "C": 3, "M": 3, "R": 2, "E": 1, "N": 257}
        v = ds["Data.IR"]
        assert v.dimensions == ("M", "R", "N") and v.dtype == np.float64
        np.testing.assert_array_equal(v[:], ir)  # bit for bit
        sr = ds["Data.SamplingRate"]
        assert sr.dimensions == ("I",) and sr[:].tolist() == [FS] and sr.Units == "hertz"
        d = ds["Data.Delay"]
        assert d.dimensions == ("I", "R") and not np.any(d[:])
        # Positions: the table's allowed dimensions and the defaults for unknown positions.
        for name, want in (
            ("ListenerPosition", ("I", "C")),
            ("SourcePosition", ("I", "C")),
            ("ReceiverPosition", ("R", "C", "I")),
            ("EmitterPosition", ("E", "C", "I")),
        ):
            pv = ds[name]
            assert pv.dimensions == want, name
            assert pv.Type == "cartesian" and pv.Units == "metre", name
            assert not np.any(pv[:]), name


def test_single_room_srir_round_trip(tmp_path):
    rs = _positions_set()
    path = write_sofa(tmp_path / "room.sofa", rs)
    with netCDF4.Dataset(path) as ds:
        g = {k: ds.getncattr(k) for k in ds.ncattrs()}
        # AES69-2022 SingleRoomSRIR 1.1 table (seen).
        assert g["SOFAConventions"] == "SingleRoomSRIR"
        assert g["SOFAConventionsVersion"] == "1.1"
        assert g["DataType"] == "FIR"
        assert g["RoomType"] in ("shoebox", "dae")
        assert g["DatabaseName"]  # mandatory in this convention
        assert g["Title"] == "Study — with a non-ASCII dash"
        assert g["AuthorContact"] == "A. Person"
        # ListenerPosition and SourcePosition depend on M (the table: MC).
        assert ds["ListenerPosition"].dimensions == ("M", "C")
        np.testing.assert_array_equal(ds["ListenerPosition"][:], rs.listener_m)
        np.testing.assert_array_equal(ds["SourcePosition"][:], rs.source_m)
        for name in ("ListenerView", "ListenerUp", "SourceView", "SourceUp"):
            assert ds[name].dimensions == ("I", "C"), name
        np.testing.assert_array_equal(ds["RoomCornerA"][:], [[0, 0, 0]])
        np.testing.assert_array_equal(ds["RoomCornerB"][:], [[12.0, 8.5, 4.0]])
        assert ds["RoomCorners"].Type == "cartesian" and ds["RoomCorners"].Units == "metre"
        # Closed forms: the volume of the box, 20 °C in kelvin (+273.15, SI definition).
        assert ds["RoomVolume"][:].tolist() == [12.0 * 8.5 * 4.0]
        assert ds["RoomVolume"].Units == "cubic metre"
        assert ds["RoomTemperature"][:].tolist() == pytest.approx([293.15])
        assert ds["RoomTemperature"].Units == "kelvin"
        np.testing.assert_array_equal(ds["Data.IR"][:], rs.ir)
    back = read_sofa(path)
    assert back.convention == "SingleRoomSRIR"
    assert back.listener_labels == rs.listener_labels and back.source_labels == rs.source_labels
    assert back.room_dimensions_m == (12.0, 8.5, 4.0)
    np.testing.assert_array_equal(back.listener_m, rs.listener_m)


def _libnetcdf():
    here = Path(netCDF4.__file__).resolve().parent.parent
    found = glob.glob(str(here / "netcdf4.libs" / "libnetcdf*"))
    name = found[0] if found else ctypes.util.find_library("netcdf")
    if not name:
        pytest.skip("the netCDF C library is not reachable through ctypes here")
    return ctypes.CDLL(name)


def _att_types(lib, path: Path, varname: str | None = None) -> dict[str, int]:
    ncid = ctypes.c_int()
    assert lib.nc_open(str(path).encode(), 0, ctypes.byref(ncid)) == 0
    try:
        varid = ctypes.c_int(-1)  # NC_GLOBAL
        if varname is not None:
            assert lib.nc_inq_varid(ncid, varname.encode(), ctypes.byref(varid)) == 0
        natts = ctypes.c_int()
        if varname is None:
            assert lib.nc_inq_natts(ncid, ctypes.byref(natts)) == 0
        else:
            assert lib.nc_inq_varnatts(ncid, varid, ctypes.byref(natts)) == 0
        out = {}
        for i in range(natts.value):
            buf = ctypes.create_string_buffer(257)
            assert lib.nc_inq_attname(ncid, varid, i, buf) == 0
            t = ctypes.c_int()
            assert lib.nc_inq_atttype(ncid, varid, buf.value, ctypes.byref(t)) == 0
            out[buf.value.decode()] = t.value
        return out
    finally:
        lib.nc_close(ncid)


NC_CHAR, NC_STRING = 2, 12  # netcdf.h (from memory); the probe below confirms them


def test_text_attributes_are_fixed_length_nc_char(tmp_path):
    lib = _libnetcdf()
    probe = tmp_path / "probe.nc"
    with netCDF4.Dataset(probe, "w", format="NETCDF4") as ds:
        ds.setncattr("fixed", b"text")
        ds.setncattr_string("variable", "text")
    assert _att_types(lib, probe) == {"fixed": NC_CHAR, "variable": NC_STRING}

    path = write_sofa(tmp_path / "room.sofa", _positions_set())
    kinds = _att_types(lib, path)
    assert set(TABLE_MANDATORY) <= set(kinds)
    # Every text attribute, the non-ASCII Title included, is NC_CHAR: the AES69 tables give
    # attributes as plain text, and readers exist that refuse NC_STRING.
    assert {k for k, t in kinds.items() if t != NC_CHAR} == set()
    for var in ("ListenerPosition", "Data.SamplingRate", "RoomVolume", "RoomCorners"):
        assert set(_att_types(lib, path, var).values()) == {NC_CHAR}, var


def _hand_made(
    path: Path,
    *,
    conv="GeneralFIR",
    data_type="FIR",
    drop=(),
    ir_dims=("M", "R", "N"),
    c=3,
    string_kind=True,
    delay=None,
    rate_units="hertz",
):
    """A SOFA file written with netCDF4 directly, as another program would (not our writer).
    Text attributes are NC_STRING here, the other kind than ours."""
    m, r, n = 2, 2, 64
    rng = np.random.default_rng(21)
    ir = rng.standard_normal((m, r, n))
    with netCDF4.Dataset(path, "w", format="NETCDF4") as ds:
        attrs = {
            "Conventions": "SOFA",
            "Version": "2.1",
            "SOFAConventions": conv,
            "SOFAConventionsVersion": "1.0",
            "DataType": data_type,
            "RoomType": "reverberant",
            "Title": "hand-made",
            "DateCreated": "2026-01-01 00:00:00",
            "DateModified": "2026-01-01 00:00:00",
            "APIName": "test",
            "APIVersion": "0",
            "AuthorContact": "test",
            "Organization": "test",
            "License": "test",
        }
        for k, v in attrs.items():
            if k in drop:
                continue
            if string_kind:
                ds.setncattr_string(k, v)
            else:
                ds.setncattr(k, v)
        for d, size in (("I", 1), ("C", c), ("M", m), ("R", r), ("E", 1), ("N", n)):
            ds.createDimension(d, size)
        sizes = {"M": m, "R": r, "N": n}
        v = ds.createVariable("Data.IR", "f8", ir_dims)
        v[:] = (
            np.transpose(ir, [("M", "R", "N").index(d) for d in ir_dims])
            if set(ir_dims) == set(sizes)
            else 0
        )
        sr = ds.createVariable("Data.SamplingRate", "f8", ("I",))
        sr[:] = [44100.0]
        sr.Units = rate_units
        dl = ds.createVariable("Data.Delay", "f8", ("M", "R"))
        dl[:] = np.array([[0, 3], [5, 0]]) if delay is None else delay
        for name, dims in (
            ("ListenerPosition", ("I", "C")),
            ("SourcePosition", ("I", "C")),
            ("ReceiverPosition", ("R", "C", "I")),
            ("EmitterPosition", ("E", "C", "I")),
        ):
            pv = ds.createVariable(name, "f8", dims)
            pv[:] = 0.0
            pv.Type = "cartesian"
            pv.Units = "metre"
    return ir


def test_a_hand_made_file_is_read_with_its_delays(tmp_path):
    path = tmp_path / "other.sofa"
    ir = _hand_made(path)
    rs = read_sofa(path)
    assert rs.convention == "GeneralFIR" and rs.rate_hz == 44100
    np.testing.assert_array_equal(rs.ir, ir)
    np.testing.assert_array_equal(rs.delays, [[0, 3], [5, 0]])
    # Data.Delay in samples (the table: "additional delay of each IR, in samples"): the
    # reference places each response at its delay with plain numpy indexing.
    data, rate = sofa_audio(path)
    assert rate == 44100 and data.shape == (64 + 5, 4)
    want = np.zeros((69, 4))
    want[0:64, 0] = ir[0, 0]
    want[3:67, 1] = ir[0, 1]
    want[5:69, 2] = ir[1, 0]
    want[0:64, 3] = ir[1, 1]
    np.testing.assert_array_equal(data, want)
    one, _ = read_audio(path, measurement=2)
    want2 = np.zeros((69, 2))
    want2[5:69, 0] = ir[1, 0]
    want2[0:64, 1] = ir[1, 1]
    np.testing.assert_array_equal(one, want2)
    parts = sofa_measurements(path)
    assert [p[0] for p in parts] == [f"{path}#1", f"{path}#2"]


def test_fixed_length_attributes_from_another_writer_are_read_too(tmp_path):
    path = tmp_path / "other.sofa"
    _hand_made(path, string_kind=False)
    assert read_sofa(path).attributes["Title"] == "hand-made"


@pytest.mark.parametrize("missing", ["License", "DataType", "SOFAConventions", "DateModified"])
def test_missing_mandatory_attribute_is_refused(tmp_path, missing):
    path = tmp_path / "bad.sofa"
    _hand_made(path, drop=(missing,))
    with pytest.raises(InputError, match=rf"bad\.sofa: .*{missing} is missing"):
        read_sofa(path)


def test_wrong_dimensions_are_refused(tmp_path):
    p1 = tmp_path / "order.sofa"
    _hand_made(p1, ir_dims=("M", "N", "R"))
    with pytest.raises(
        InputError, match=r"Data\.IR has dimensions \(M, N, R\), expected \(M, R, N\)"
    ):
        read_sofa(p1)
    p2 = tmp_path / "c2.sofa"
    _hand_made(p2, c=2)
    with pytest.raises(InputError, match="C=2"):
        read_sofa(p2)


def test_unsupported_conventions_and_data_types_are_named(tmp_path):
    p1 = tmp_path / "mimo.sofa"
    _hand_made(p1, conv="SingleRoomMIMOSRIR", data_type="FIR-E")
    with pytest.raises(InputError, match="data type 'FIR-E' \\(SingleRoomMIMOSRIR\\)"):
        read_sofa(p1)
    p2 = tmp_path / "tf.sofa"
    _hand_made(p2, conv="GeneralTF", data_type="TF")
    with pytest.raises(InputError, match="'TF'"):
        read_sofa(p2)
    p3 = tmp_path / "dir.sofa"
    _hand_made(p3, conv="FreeFieldDirectivityFIR")
    with pytest.raises(InputError, match="convention 'FreeFieldDirectivityFIR' is not supported"):
        read_sofa(p3)


def test_other_bad_contents_are_refused(tmp_path):
    p1 = tmp_path / "frac.sofa"
    _hand_made(p1, delay=np.array([[0.5, 0], [0, 0]]))
    with pytest.raises(InputError, match="fractions of a sample"):
        read_sofa(p1)
    p2 = tmp_path / "units.sofa"
    _hand_made(p2, rate_units="kilohertz")
    with pytest.raises(InputError, match="'kilohertz'"):
        read_sofa(p2)


def test_a_file_that_is_not_netcdf_is_refused(tmp_path):
    p = tmp_path / "fake.sofa"
    sf.write(p.with_suffix(".wav"), np.zeros(10), FS)
    os.replace(p.with_suffix(".wav"), p)  # a WAV file named .sofa
    with pytest.raises(InputError, match=r"fake\.sofa: cannot be read as a SOFA file"):
        read_sofa(p)
    with pytest.raises(InputError, match=r"fake\.sofa: cannot be read as a SOFA file"):
        read_audio(p)


def test_measurement_numbers_are_checked(tmp_path):
    path = write_sofa(tmp_path / "s.sofa", ResponseSet(_ir(3, 1), FS))
    with pytest.raises(InputError, match="has no measurement 4: it holds 3"):
        sofa_audio(path, measurement=4)
    with pytest.raises(InputError, match="holds 3 measurements"):
        sofa_audio(path, single=True)
    wav = tmp_path / "h.wav"
    sf.write(wav, np.ones(4), FS)
    with pytest.raises(InputError, match="applies to SOFA response sets only"):
        read_audio(wav, measurement=1)


def test_padding_is_recorded_and_cut_off_again(tmp_path):
    ir = np.zeros((2, 1, 100))
    ir[0, 0, :] = np.linspace(1, 0.01, 100)
    ir[1, 0, :60] = np.linspace(1, 0.01, 60)
    path = write_sofa(tmp_path / "p.sofa", ResponseSet(ir, FS, lengths=np.array([100, 60])))
    parts = sofa_measurements(path)
    assert parts[0][1].shape == (100, 1) and parts[1][1].shape == (60, 1)
    np.testing.assert_array_equal(parts[1][1][:, 0], ir[1, 0, :60])
    with netCDF4.Dataset(path) as ds:
        assert ds["ResponseLength"][:].tolist() == [100, 60]


def test_spherical_positions_are_converted_to_cartesian(tmp_path):
    path = tmp_path / "sph.sofa"
    _hand_made(path)
    with netCDF4.Dataset(path, "a") as ds:
        ds["SourcePosition"][:] = [[90.0, 30.0, 2.0]]
        ds["SourcePosition"].Type = "spherical"
        ds["SourcePosition"].Units = "degree, degree, metre"
    rs = read_sofa(path)
    # Closed form: azimuth 90° and elevation 30° at 2 m lie at (0, 2·cos 30°, 2·sin 30°).
    np.testing.assert_allclose(rs.source_m[0], [0.0, np.sqrt(3.0), 1.0], atol=1e-12)
