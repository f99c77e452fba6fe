"""Signal processing: filter design, streaming stages, detectors, channelizer."""
