"""Runs the README's PyTorch export recipe ("Getting a model into ONNX") once,
on a small classifier with the parts that behave differently in training and
in inference (BatchNorm2d, Dropout), and writes the ONNX file given as the
only argument with Fovea's `labels` and `preprocess` metadata.

Run by `make check-export` against Debian's python3-torch and python3-onnx
(/usr/bin/python3); the classifier's weights are random (seeded), since the
check is about the export, not about what the network learned.
"""
import json
import sys

import os

import torch

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from classifier import Classifier  # noqa: E402

OUT = sys.argv[1]
CLASSES = ["washer", "copper washer", "hex nut", "wood screw", "coil spring", "cable tie", "wall plug"]
MEAN, STD = [0.295, 0.305, 0.298], [0.144, 0.124, 0.128]

torch.manual_seed(7)


model = Classifier(len(CLASSES))
# Give the batch-norm layers running statistics that differ from their
# defaults (mean 0, variance 1), as a trained network has: a few forward
# passes in training mode on random input.
model.train()
with torch.no_grad():
    for _ in range(3):
        model(torch.rand(8, 3, 64, 64))

# --- the recipe, as in README.md -------------------------------------------
model.eval()                                  # dropout off, batch norm uses its running statistics
dummy = torch.zeros(1, 3, 64, 64)             # one image of the training size, NCHW
torch.onnx.export(
    model, dummy, OUT,
    input_names=["image"], output_names=["logits"],
    dynamic_axes={"image": {0: "batch"}, "logits": {0: "batch"}},
    opset_version=13,
    do_constant_folding=True,
)

import onnx                                    # noqa: E402  (the metadata snippet, as in README.md)

m = onnx.load(OUT)
for key, value in {
    "labels": json.dumps(CLASSES),
    "preprocess": json.dumps({"layout": "nchw", "range": "0-1", "mean": MEAN, "std": STD, "resize": "stretch"}),
}.items():
    entry = m.metadata_props.add()
    entry.key, entry.value = key, value
onnx.checker.check_model(m)
onnx.save(m, OUT)
# ---------------------------------------------------------------------------

# Keep the eval-mode model's own answer for check_result.py.
torch.save(model.state_dict(), OUT + ".pt")
print("export_torch: wrote %s (PyTorch %s, onnx %s, opset %d)" % (
    OUT, torch.__version__, onnx.__version__, m.opset_import[0].version))
