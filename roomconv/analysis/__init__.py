"""Room-acoustic parameters from impulse responses by the ISO 3382 methods."""
