"""Response sets in the open SOFA format (AES69-2022): reading (:mod:`.read`) and writing
through the write guard (:mod:`.write`). An I/O layer like :mod:`roomconv.audio`: no
numerics here."""

from .read import (
    MANDATORY_GLOBALS,
    READABLE_CONVENTIONS,
    ResponseSet,
    is_sofa,
    measurement_number,
    read_sofa,
    sofa_audio,
)
from .write import convention_for, write_sofa

__all__ = [
    "MANDATORY_GLOBALS",
    "READABLE_CONVENTIONS",
    "ResponseSet",
    "is_sofa",
    "measurement_number",
    "read_sofa",
    "sofa_audio",
    "convention_for",
    "write_sofa",
]
