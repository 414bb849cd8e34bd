"""Checks what Fovea made of the file export_torch.py wrote: the layer table
(`fovea layers --json`) and the top three classes (`fovea classify --json`)
against PyTorch itself, run on the same image with the preprocessing that the
file's metadata states. Arguments: MODEL.onnx LAYERS.json TOP.json IMAGE.png.

References: PyTorch's eval-mode output (Debian python3-torch) with softmax
exp(z_i) / sum_j exp(z_j); the ONNX file's graph and metadata read with the
onnx package (Debian python3-onnx). Probabilities agree to 1e-4 absolute:
float32 through two different convolution implementations (common practice).
"""
import json
import os
import sys

import numpy as np
import onnx
import torch
from PIL import Image

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from classifier import Classifier  # noqa: E402

onnx_path, layers_path, top_path, image_path = sys.argv[1:5]
fails = []


def check(ok, what):
    print(("ok    " if ok else "FAIL  ") + what)
    if not ok:
        fails.append(what)


m = onnx.load(onnx_path)
inp = m.graph.input[0]
dims = [d.dim_param or d.dim_value for d in inp.type.tensor_type.shape.dim]
check(dims == ["batch", 3, 64, 64], "ONNX input %s is batch x 3 x 64 x 64 with a symbolic batch axis: %s" % (inp.name, dims))
check(m.opset_import[0].version == 13, "ONNX opset %d (the recipe asks for 13)" % m.opset_import[0].version)
ops = [n.op_type for n in m.graph.node]
# Exported for inference, Dropout is no node at all and BatchNormalization is
# folded into the Conv before it (torch.onnx.export, TrainingMode.EVAL).
check("Dropout" not in ops and "BatchNormalization" not in ops,
      "no Dropout or BatchNormalization node, so the export was for inference: %s" % sorted(set(ops)))

layers = json.load(open(layers_path))
check(layers["inputs"][0]["shape"] == [-1, 3, 64, 64] and layers["inputs"][0]["symbolic"][0] == "batch",
      "fovea layers reads the input as batch x 3 x 64 x 64: %s %s" % (layers["inputs"][0]["shape"], layers["inputs"][0]["symbolic"]))
table_ops = [l["op"] for l in layers["layers"]]
for op in ("Conv", "MaxPool", "Gemm"):
    check(table_ops.count(op) == ops.count(op), "fovea layers lists %d %s layers, the graph has %d" % (table_ops.count(op), op, ops.count(op)))
params = sum(int(np.prod(t.dims)) for t in m.graph.initializer if t.data_type == onnx.TensorProto.FLOAT)
check(layers["total"]["params"] == params, "fovea's parameter total %d equals the float initializers' element count %d" % (layers["total"]["params"], params))

meta = {p.key: p.value for p in m.metadata_props}
pre = json.loads(meta["preprocess"])
labels = json.loads(meta["labels"])
img = np.asarray(Image.open(image_path).convert("RGB"), dtype=np.float32) / 255.0
check(img.shape == (64, 64, 3), "the image is already 64 x 64, so no resize enters the comparison")
x = (img - np.array(pre["mean"], np.float32)) / np.array(pre["std"], np.float32)
x = torch.from_numpy(np.ascontiguousarray(x.transpose(2, 0, 1)[None]))

model = Classifier(len(labels))
model.load_state_dict(torch.load(onnx_path + ".pt"))
model.eval()
with torch.no_grad():
    p = torch.softmax(model(x), dim=1)[0].numpy().astype(np.float64)
order = [int(i) for i in np.argsort(-p)[:3]]
top = json.load(open(top_path))["top"]
check([t["index"] for t in top] == order, "fovea classify's top 3 %s are PyTorch's %s" % ([t["index"] for t in top], order))
for t in top:
    check(abs(t["probability"] - p[t["index"]]) <= 1e-4,
          "class %d: fovea %.6f, PyTorch %.6f" % (t["index"], t["probability"], p[t["index"]]))
    check(t["label"] == labels[t["index"]], "class %d's label %r comes from the labels metadata" % (t["index"], t["label"]))

print("check-export: %d checks failed" % len(fails) if fails else
      "check-export: the exported file opens in Fovea, which gives PyTorch's answer")
sys.exit(1 if fails else 0)
