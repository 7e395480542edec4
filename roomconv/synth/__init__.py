"""Synthetic room responses: air absorption, reverberation prediction, image sources, tails,
and editing of existing responses."""
