#!/usr/bin/python3
"""Reference data for Fovea's preprocessing, made by torchvision (Debian
python3-torchvision 0.14, python3-torch 1.13, python3-pil, python3-numpy).

Run from the repository root:

    /usr/bin/python3 modelio/prep/testdata/torchvision/gen_torchvision.py

It writes, beside itself:
  - <W>x<H>-<mode>.png: the 224x224 RGB picture torchvision's PIL transforms
    make of the synthetic test image of that size (see test_image), for
    mode stretch  = Resize((224, 224)),
         crop     = Resize(224) + CenterCrop(224),
         crop-256 = Resize(256) + CenterCrop(224),
    all with PIL's bilinear filter (antialiased when shrinking);
  - 400x300-crop-256.f32: ToTensor + Normalize(ImageNet mean/std) of that
    crop, float32 little-endian, [3][224][224];
  - tiny224.onnx: a small random-weight CNN (seed 0) exported by torch.onnx;
  - reference.json: the SHA-256 of each synthetic image's RGB bytes (so the Go
    test knows it generated the same picture) and, per image and mode, the
    model's top-5 softmax probabilities computed by PyTorch on the torchvision
    tensors.

Python runs only here, never in `make test`: the Go tests read these files.
The output is the same on every run (fixed seed, integer image formula).
"""
import hashlib
import json
import os

import numpy as np
import torch
from PIL import Image
from torchvision import transforms

HERE = os.path.dirname(os.path.abspath(__file__))
SIZES = [(400, 300), (301, 517), (1024, 683)]
MODES = {
    "stretch": [transforms.Resize((224, 224))],
    "crop": [transforms.Resize(224), transforms.CenterCrop(224)],
    "crop-256": [transforms.Resize(256), transforms.CenterCrop(224)],
}
MEAN, STD = [0.485, 0.456, 0.406], [0.229, 0.224, 0.225]


def test_image(w, h):
    """The synthetic photo-sized test image: gradients, an odd-sized
    checkerboard, a disk and an integer-hash texture. Integer arithmetic only,
    so the Go test computes the same bytes (it checks their SHA-256)."""
    y, x = np.mgrid[0:h, 0:w].astype(np.int64)
    r = x * 255 // (w - 1)
    g = y * 255 // (h - 1)
    b = 40 + 160 * (((x // 23) + (y // 17)) % 2)
    cx, cy, rad = w * 2 // 5, h * 3 // 5, min(w, h) // 4
    inside = (x - cx) ** 2 + (y - cy) ** 2 < rad * rad
    r = np.where(inside, 255 - r, r)
    g = np.where(inside, (g + 128) % 256, g)
    t = ((x * 73856093) ^ (y * 19349663)) % 17 - 8
    rgb = np.stack([r + t, g + t, b + t], axis=-1)
    return np.clip(rgb, 0, 255).astype(np.uint8)


def model():
    torch.manual_seed(0)
    net = torch.nn.Sequential(
        torch.nn.Conv2d(3, 8, 7, stride=4, padding=3), torch.nn.ReLU(),
        torch.nn.MaxPool2d(2),
        torch.nn.Conv2d(8, 16, 3, stride=2, padding=1), torch.nn.ReLU(),
        torch.nn.AdaptiveAvgPool2d(1), torch.nn.Flatten(),
        torch.nn.Linear(16, 10))
    with torch.no_grad():
        net[7].weight.mul_(20)  # spread the logits so probabilities react to the input
    return net.eval()


def main():
    torch.set_num_threads(1)  # the same float sums, in the same order, on every run
    net = model()
    torch.onnx.export(net, torch.zeros(1, 3, 224, 224), os.path.join(HERE, "tiny224.onnx"),
                      input_names=["image"], output_names=["logits"],
                      dynamic_axes={"image": {0: "N"}, "logits": {0: "N"}}, opset_version=13)
    norm = transforms.Compose([transforms.ToTensor(), transforms.Normalize(MEAN, STD)])
    ref = {"images": {}, "top5": {}}
    for w, h in SIZES:
        arr = test_image(w, h)
        name = f"{w}x{h}"
        ref["images"][name] = hashlib.sha256(arr.tobytes()).hexdigest()
        img = Image.fromarray(arr, "RGB")
        for mode, ts in MODES.items():
            out = transforms.Compose(ts)(img)
            assert out.size == (224, 224), out.size
            out.save(os.path.join(HERE, f"{name}-{mode}.png"), optimize=True)
            x = norm(out)
            if name == "400x300" and mode == "crop-256":
                x.numpy().astype("<f4").tofile(os.path.join(HERE, f"{name}-{mode}.f32"))
            with torch.no_grad():
                p = torch.softmax(net(x.unsqueeze(0)), dim=1)[0]
            top = torch.topk(p, 5)
            ref["top5"][f"{name}-{mode}"] = [[int(i), float(v)] for v, i in zip(top.values, top.indices)]
    with open(os.path.join(HERE, "reference.json"), "w") as f:
        json.dump(ref, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
