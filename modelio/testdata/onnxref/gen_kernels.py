#!/usr/bin/python3
"""Real exports for the kernel-extraction test, and their first-layer
weights read independently by the onnx package's numpy_helper (Debian
python3-onnx 1.12, python3-torch 1.13, python3-numpy).

Run from the repository root:

    /usr/bin/python3 modelio/testdata/onnxref/gen_kernels.py

It writes, beside itself:
  - bnfold.onnx: a PyTorch model Conv(3->6, 5x5, stride 2, no bias) +
    BatchNorm + ReLU + ..., exported by torch.onnx in eval mode, which folds
    the BatchNorm into the Conv's weight and bias (the generator checks that
    no BatchNormalization is left and that the folded values are
    W*gamma/sqrt(var+eps) and beta-mean*gamma/sqrt(var+eps));
  - constant.onnx: the same graph with every initializer turned into a
    Constant node (how some converters store weights);
  - float16.onnx: the same graph with every initializer stored as float16
    and a Cast to float in front of its use (how float16 converters that
    keep float inputs write it);
  - kernels.json: per file, the first Conv's node name, weight dims, group,
    weight and bias values as numpy_helper.to_array reads them from the
    written file (float16 widened to float32 by numpy, which is exact).

Python runs only here, never in `make test`. The output is the same on every run.
"""
import json
import os

import numpy as np
import onnx
import torch
from onnx import helper, numpy_helper

HERE = os.path.dirname(os.path.abspath(__file__))


def net():
    torch.manual_seed(1)
    m = torch.nn.Sequential(
        torch.nn.Conv2d(3, 6, 5, stride=2, padding=2, bias=False),
        torch.nn.BatchNorm2d(6), torch.nn.ReLU(),
        torch.nn.Conv2d(6, 4, 3, padding=1), torch.nn.ReLU(),
        torch.nn.AdaptiveAvgPool2d(1), torch.nn.Flatten(), torch.nn.Linear(4, 3))
    bn = m[1]
    with torch.no_grad():
        bn.weight.uniform_(0.5, 2.0)
        bn.bias.uniform_(-1, 1)
        bn.running_mean.uniform_(-0.5, 0.5)
        bn.running_var.uniform_(0.2, 3.0)
    return m.eval()


def first_conv(model):
    for n in model.graph.node:
        if n.op_type == "Conv":
            return n
    raise SystemExit("no Conv")


def producer_value(model, name):
    """The array behind a Conv input, following Constant and Cast nodes."""
    for t in model.graph.initializer:
        if t.name == name:
            return numpy_helper.to_array(t)
    for n in model.graph.node:
        if name in n.output:
            if n.op_type == "Constant":
                return numpy_helper.to_array(n.attribute[0].t)
            if n.op_type == "Cast":
                return producer_value(model, n.input[0])
    raise SystemExit(f"no value for {name}")


def to_constants(model):
    m = onnx.ModelProto()
    m.CopyFrom(model)
    consts = [helper.make_node("Constant", [], [t.name], name="const_" + t.name, value=t)
              for t in m.graph.initializer]
    del m.graph.initializer[:]
    nodes = consts + list(m.graph.node)
    del m.graph.node[:]
    m.graph.node.extend(nodes)
    return m


def to_float16(model):
    m = onnx.ModelProto()
    m.CopyFrom(model)
    casts, inits = [], []
    for t in m.graph.initializer:
        half = numpy_helper.from_array(numpy_helper.to_array(t).astype(np.float16), t.name + "_fp16")
        inits.append(half)
        casts.append(helper.make_node("Cast", [half.name], [t.name], name="cast_" + t.name, to=onnx.TensorProto.FLOAT))
    del m.graph.initializer[:]
    m.graph.initializer.extend(inits)
    nodes = casts + list(m.graph.node)
    del m.graph.node[:]
    m.graph.node.extend(nodes)
    return m


def main():
    torch.set_num_threads(1)
    m = net()
    path = os.path.join(HERE, "bnfold.onnx")
    torch.onnx.export(m, torch.zeros(1, 3, 32, 32), path, input_names=["image"], output_names=["logits"],
                      opset_version=13, do_constant_folding=True)
    base = onnx.load(path)
    assert not any(n.op_type == "BatchNormalization" for n in base.graph.node), "BatchNorm not folded"
    conv = first_conv(base)
    bn = m[1]
    s = (bn.weight / torch.sqrt(bn.running_var + bn.eps)).detach().numpy()
    w = producer_value(base, conv.input[1])
    b = producer_value(base, conv.input[2])
    np.testing.assert_allclose(w, m[0].weight.detach().numpy() * s[:, None, None, None], rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose(b, (bn.bias - bn.running_mean * torch.from_numpy(s)).detach().numpy(), rtol=1e-5, atol=1e-6)

    onnx.save(to_constants(base), os.path.join(HERE, "constant.onnx"))
    onnx.save(to_float16(base), os.path.join(HERE, "float16.onnx"))

    ref = {}
    for name in ["bnfold.onnx", "constant.onnx", "float16.onnx"]:
        model = onnx.load(os.path.join(HERE, name))
        onnx.checker.check_model(model)
        conv = first_conv(model)
        w = producer_value(model, conv.input[1]).astype(np.float32)
        b = producer_value(model, conv.input[2]).astype(np.float32)
        group = 1
        for a in conv.attribute:
            if a.name == "group":
                group = a.i
        ref[name] = {"node": conv.name, "dims": list(w.shape), "group": group,
                     "w": [float(v) for v in w.ravel()], "bias": [float(v) for v in b.ravel()]}
    with open(os.path.join(HERE, "kernels.json"), "w") as f:
        json.dump(ref, f, indent=0, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
