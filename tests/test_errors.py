"""The exception family: InputError is a ValueError for library users and exit 2 for the CLI."""

from __future__ import annotations

import pytest

from roomconv.errors import DeviceError, InputError, OutputExistsError, RoomconvError
from roomconv.synth.room import RoomModel


def test_input_error_is_a_value_error_and_a_roomconv_error():
    # Python data model: `except ValueError` catches instances of any subclass.
    with pytest.raises(ValueError):
        raise InputError("x")
    assert issubclass(InputError, RoomconvError)
    assert issubclass(OutputExistsError, ValueError)
    assert not issubclass(DeviceError, ValueError)
    assert (InputError.exit_code, RoomconvError.exit_code) == (2, 1)


def test_library_refusal_caught_as_value_error():
    # A library user who knows only built-in types catches a refused room as ValueError.
    with pytest.raises(ValueError, match="length"):
        RoomModel(-1.0, 3.0, 2.5)


def test_cli_exit_code_2_for_a_bad_room(cli, tmp_path):
    # A receiver outside the room is refused by the library as InputError, which the CLI
    # reports in one line with exit code 2 (the convention for usage errors).
    code, out, err = cli("synth", "--room", "4x3x2.5", "--receiver", "9,1,1", tmp_path / "ir.wav")
    assert code == 2
    assert "receiver" in err and "outside the room" in err
    assert not (tmp_path / "ir.wav").exists()
    assert err.startswith("roomconv: error:")
    assert "Traceback" not in err
