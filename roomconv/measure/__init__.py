"""Swept-sine measurement: the excitation, its deconvolution and the quality of the result."""
