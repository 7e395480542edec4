"""roomconv: measure, analyse, synthesize and render through room impulse responses.

The numerics live in :mod:`roomconv.measure`, :mod:`roomconv.analysis`, :mod:`roomconv.synth`
and :mod:`roomconv.render`; :mod:`roomconv.jobs` holds one function per user job, which
:mod:`roomconv.cli`, :mod:`roomconv.demo` and the ``tui`` package call.
"""

__version__ = "0.1.0"
