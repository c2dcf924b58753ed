"""Export of a fitted forest to open formats: the ONNX tree-ensemble operator (:mod:`.onnx_model`)."""
