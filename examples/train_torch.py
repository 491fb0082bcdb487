#!/usr/bin/env python3
"""Trains a small convolutional network on a kiln output folder on the CPU and prints the test
accuracy: the shortest honest training loop on kiln's output.

    python3 examples/train_torch.py packed/ [--epochs 15] [--seed 0] [--threads N]

Needs PyTorch and the kten package (bash examples/python/install.sh; the README's set-up runs it).
Images come as float32 [C, H, W] normalised with the training split's statistics, labels as
int64, whatever dtype and layout the folder was packed with (docs/training.md).
"""
import argparse
import os

import torch
from torch import nn
from torch.utils.data import DataLoader

import kten


def small_cnn(channels, classes):
    # Adaptive pooling makes it work for any --size kiln packed with.
    return nn.Sequential(
        nn.Conv2d(channels, 16, 3, padding=1), nn.BatchNorm2d(16), nn.ReLU(), nn.MaxPool2d(2),
        nn.Conv2d(16, 32, 3, padding=1), nn.BatchNorm2d(32), nn.ReLU(),
        nn.AdaptiveMaxPool2d(4), nn.Flatten(),
        nn.Linear(32 * 4 * 4, 64), nn.ReLU(), nn.Dropout(0.2), nn.Linear(64, classes))


def accuracy(model, data):
    """(correct, labelled) over a Dataset; records without a label (-1) are not counted."""
    model.eval()
    right = total = 0
    with torch.no_grad():
        for x, y in DataLoader(data, batch_size=256):
            known = y >= 0
            right += (model(x).argmax(1)[known] == y[known]).sum().item()
            total += known.sum().item()
    return right, total


def report(name, right, total):
    share = f"{right / total:.4f}" if total else "n/a"
    return f"{name} accuracy {share} ({right}/{total})"


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("outdir", help="a kiln output folder (train.kten, val.kten, test.kten)")
    ap.add_argument("--epochs", type=int, default=15)
    ap.add_argument("--batch", type=int, default=64)
    ap.add_argument("--lr", type=float, default=1e-3)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--threads", type=int, help="CPU threads (default: PyTorch's choice)")
    ap.add_argument("--workers", type=int, default=0, help="DataLoader worker processes")
    args = ap.parse_args()
    torch.manual_seed(args.seed)
    if args.threads:
        torch.set_num_threads(args.threads)

    train, val, test = (kten.Dataset(os.path.join(args.outdir, f"{s}.kten"))
                        for s in ("train", "val", "test"))
    model = small_cnn(train.shape[0], len(train.classes))
    opt = torch.optim.Adam(model.parameters(), lr=args.lr)
    batches = DataLoader(train, batch_size=args.batch, shuffle=True, num_workers=args.workers)
    print(f"{len(train)} training records {list(train.shape)}, {len(train.classes)} classes; "
          f"{len(val)} validation, {len(test)} test")
    for epoch in range(1, args.epochs + 1):
        model.train()
        for x, y in batches:
            opt.zero_grad()
            loss = nn.functional.cross_entropy(model(x), y, ignore_index=-1)
            loss.backward()
            opt.step()
        print(f"epoch {epoch}: last batch loss {loss.item():.3f}, "
              + report("validation", *accuracy(model, val)), flush=True)
    print(report("test", *accuracy(model, test)))


if __name__ == "__main__":
    main()
