"""The demo's dry clips, synthesized by us (see make_clips.py); installed as the package data
``roomconv.demo_audio`` and found with :mod:`importlib.resources`."""
