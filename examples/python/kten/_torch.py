"""PyTorch side of kten: a Dataset that maps the .kten file lazily in each process, and a
loader of whole splits into tensors. Imported by `kten.Dataset` / `kten.load_tensors` on use."""
import operator
import os

import numpy as np
import torch
import torch.utils.data

from . import KtenError, KtenFile


class Dataset(torch.utils.data.Dataset):
    """Records of one .kten file as (image, label): image a float32 tensor [C, H, W] whatever
    the file's layout and dtype (u8, u16 or f32), label an int64 tensor (-1 = no label).

    normalise=True (default) gives (v / M - mean) / std per channel, with the training split's
    population mean and standard deviation in [0,1] scale (M = 255 or 65535) as recorded in
    the file: the numbers kiln uses for --dtype f32, so every split is normalised with the
    training statistics only. normalise=False gives v / M in [0,1]. `transform` is applied to
    the image tensor and `target_transform` to the label.

    The file is validated when the Dataset is made, but memory-mapped only when a process first
    reads an item: pickling the Dataset into DataLoader workers (spawn or forkserver) sends the
    path and a few numbers, never the array, and a forked worker maps the file itself. A worker
    that finds a different file under the path (a rebuild in between) raises KtenError.
    """

    def __init__(self, path, normalise=True, verify=False, transform=None,
                 target_transform=None):
        first = KtenFile(path, verify=verify)
        first.converter(normalise)  # fails here, not in a worker, when there are no statistics
        self.path = first.path
        self.normalise = normalise
        self.transform = transform
        self.target_transform = target_transform
        self.classes = list(first.classes)
        self.mean, self.std = first.mean, first.std
        self.split, self.layout, self.dtype = first.split, first.layout, first.dtype
        self.shape = (first.channels, first.height, first.width)
        self._length = len(first)
        self._fingerprint = first.fingerprint
        self._file = self._convert = self._pid = None

    def __len__(self):
        return self._length

    @property
    def file(self):
        """The KtenFile mapped in this process (opened on first use)."""
        pid = os.getpid()
        if self._file is None or self._pid != pid:
            f = KtenFile(self.path)
            if f.fingerprint != self._fingerprint:
                raise KtenError(self.path, "file changed since the Dataset was made (rebuilt?)")
            self._file, self._convert, self._pid = f, f.converter(self.normalise), pid
        return self._file

    def __getitem__(self, index):
        f = self.file
        i = operator.index(index)
        if i < 0:
            i += self._length
        if not 0 <= i < self._length:
            raise IndexError(f"record {index} of {self._length}")
        # astype copies: the tensor owns writable memory, never the read-only map.
        image = torch.from_numpy(self._convert(f.images[i:i + 1])[0].astype(np.float32))
        label = torch.tensor(int(f.labels[i]), dtype=torch.int64)
        if self.transform is not None:
            image = self.transform(image)
        if self.target_transform is not None:
            label = self.target_transform(label)
        return image, label

    def __getstate__(self):
        state = self.__dict__.copy()
        state["_file"] = state["_convert"] = state["_pid"] = None
        return state


def load_tensors(path, normalise=True, verify=False, max_bytes=None):
    """A whole split in memory as tensors: (float32 [N, C, H, W], int64 [N]), normalised as
    Dataset describes. For small sets; refuses with MemoryError past max_bytes (default: half
    of the available memory)."""
    x, y = KtenFile(path, verify=verify).load(normalise=normalise, max_bytes=max_bytes)
    return torch.from_numpy(x), torch.from_numpy(y)
