"""Signal processing, no I/O: filter design (``filters/``), streaming stages (``stages/``), detectors,
audio post-processing, row-wise FIR (``batch``) and the fast-convolution channelizer.

Every streaming object here implements :class:`iqsift.dsp.stages.Stage`.
"""
