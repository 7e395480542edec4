"""roomconv: measure, analyse, synthesize and render through room impulse responses.

The numerics live in :mod:`roomconv.measure`, :mod:`roomconv.analysis`, :mod:`roomconv.synth`
and :mod:`roomconv.render`; :mod:`roomconv.cli` and the ``tui`` package are thin shells.
"""

__version__ = "0.1.0"
