"""The small classifier export_torch.py exports and check_result.py runs:
the layer kinds whose behaviour differs between training and inference
(BatchNorm2d, Dropout) around plain convolutions, pooling and a linear head."""
import torch.nn as nn


class Classifier(nn.Module):
    def __init__(self, classes):
        super().__init__()
        self.features = nn.Sequential(
            nn.Conv2d(3, 16, 5, padding=2), nn.BatchNorm2d(16), nn.ReLU(), nn.MaxPool2d(2),
            nn.Conv2d(16, 32, 3, padding=1), nn.BatchNorm2d(32), nn.ReLU(), nn.MaxPool2d(2),
            nn.AdaptiveAvgPool2d(1))
        self.head = nn.Sequential(nn.Flatten(), nn.Dropout(0.5), nn.Linear(32, classes))

    def forward(self, x):
        return self.head(self.features(x))
