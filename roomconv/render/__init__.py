"""Rendering dry audio through impulse responses: the partitioned convolution engine, offline
files, batches on a pool or a cluster, and live sound-card processing."""
