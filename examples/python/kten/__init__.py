"""Reads kiln's .kten tensor files (docs/format.md) by memory map, for training.

    import kten
    train = kten.open("packed/train.kten")      # validated header, arrays memory-mapped
    train.images, train.labels                   # read-only numpy views of the file
    train.classes, train.mean, train.std         # class names; training statistics, [0,1] scale
    x, y = kten.load("packed/val.kten")          # whole split in memory: float32 NCHW, int64

`kten.Dataset` and `kten.load_tensors` are the PyTorch side (kten/_torch.py); they import torch
only when used, so numpy is the package's only requirement.
"""
import builtins
import hashlib
import json
import os
import struct

import numpy as np

__version__ = "0.1.0"
__all__ = ["KtenError", "KtenFile", "open", "load", "Dataset", "load_tensors"]

MAGIC = b"KTEN\r\n\x1a\n"
ALIGN = 4096
ENTRY = 128
MAX_ARRAYS = 31
# dtype codes of the array table (docs/format.md) and the metadata's names for image dtypes.
DTYPES = {1: np.dtype("<u1"), 2: np.dtype("<u2"), 3: np.dtype("<i4"), 4: np.dtype("<u4"),
          5: np.dtype("<f4")}
IMAGE_DTYPES = {"u8": 1, "u16": 2, "f32": 5}
# Records are converted to float in blocks of this many values so that a whole-split load needs
# its float32 result plus a bounded float64 scratch, not a float64 copy of the split.
BLOCK_VALUES = 1 << 22


class KtenError(ValueError):
    """A file that is not a readable .kten file, or does not match what it claims. `path` names
    the file and `problem` says what is wrong; str() gives "path: problem", as kiln prints."""

    def __init__(self, path, problem=None):
        # One argument is a whole message: how DataLoader re-raises a worker's exception.
        super().__init__(path if problem is None else f"{path}: {problem}")
        self.path = path if problem is not None else None
        self.problem = problem


def _channels_of(stats, key, path):
    """Per-channel `key` values of a statistics object, or None when the split was empty (kiln
    writes null, or omits the channels, for a split without records)."""
    if not stats or not stats.get("channels") or not stats.get("records"):
        return None
    try:
        return tuple(float(c[key]) for c in stats["channels"])
    except (KeyError, TypeError, ValueError):
        raise KtenError(path, f"statistics lack a numeric '{key}' per channel") from None


class KtenFile:
    """One split of a packed data set. Arrays are read-only numpy memory maps of the file:
    nothing is read until it is used, and the file stays mapped while an array is referenced.

    Attributes: path, metadata (the JSON block), split, layout ("nhwc"/"nchw"), dtype
    ("u8"/"u16"/"f32"), record_depth (8/16), classes, images, labels (int32, -1 = no label),
    item (row in items.csv), arrays (every array by name), channels, height, width.
    """

    def __init__(self, path, verify=False):
        self.path = os.fspath(path)
        self._recipe = None
        with builtins.open(self.path, "rb") as f:
            head = f.read(ALIGN)
            size = os.fstat(f.fileno()).st_size
            self._parse_header(head, size)
            f.seek(self._meta_offset)
            meta_bytes = f.read(self._meta_length)
        if len(meta_bytes) != self._meta_length:
            self._fail("file is shorter than its metadata block")
        if hashlib.sha256(meta_bytes).digest() != self._meta_sha:
            self._fail("metadata block does not match the SHA-256 in the header")
        try:
            self.metadata = json.loads(meta_bytes.decode("utf-8"))
        except (UnicodeDecodeError, ValueError) as e:
            self._fail(f"metadata block is not UTF-8 JSON ({e})")
        if not isinstance(self.metadata, dict):
            self._fail("metadata block is not a JSON object")
        self._map_arrays()
        self._check_metadata()
        if verify:
            self.verify()

    # -- header and array table (docs/format.md) --

    def _fail(self, problem):
        raise KtenError(self.path, problem)

    def _parse_header(self, head, size):
        if size == 0:
            self._fail("empty file (0 bytes)")
        if len(head) < 8 or head[:8] != MAGIC:
            if head[:4] == MAGIC[:4]:
                self._fail("damaged magic bytes (a text-mode transfer or line-ending conversion?)")
            self._fail(f"not a .kten file (starts {head[:8].hex(' ')})")
        if len(head) < ALIGN:
            self._fail(f"truncated: {size} bytes, shorter than the {ALIGN}-byte header")
        version, header_size, count, entry_size = struct.unpack_from("<4I", head, 8)
        if version != 1:
            self._fail(f"format version {version}; this reader knows version 1")
        if header_size != ALIGN or entry_size != ENTRY:
            self._fail(f"header size {header_size} and entry size {entry_size} "
                       f"(expected {ALIGN} and {ENTRY})")
        if count > MAX_ARRAYS:
            self._fail(f"array count {count} exceeds {MAX_ARRAYS}")
        self._meta_offset, self._meta_length = struct.unpack_from("<2Q", head, 24)
        self._meta_sha = head[40:72]
        (file_size,) = struct.unpack_from("<Q", head, 72)
        (alignment,) = struct.unpack_from("<I", head, 80)
        if alignment != ALIGN:
            self._fail(f"alignment {alignment}, expected {ALIGN}")
        if file_size != size:
            self._fail(f"header says {file_size} bytes, file has {size} "
                       f"({'truncated' if size < file_size else 'extra bytes at the end'})")
        if self._meta_offset % ALIGN or self._meta_offset < ALIGN:
            self._fail(f"metadata offset {self._meta_offset} is not a multiple of {ALIGN} "
                       "after the header")
        if self._meta_offset + self._meta_length != file_size:
            self._fail("metadata block does not run to the end of the file")
        self._head = bytes(head)
        self._entries = []
        for i in range(count):
            self._entries.append(self._parse_entry(head[ENTRY * (i + 1):ENTRY * (i + 2)], i))

    def _parse_entry(self, e, index):
        raw = e[:16].rstrip(b"\0")
        if not raw or b"\0" in raw or max(raw) > 0x7e or min(raw) < 0x21:
            self._fail(f"array {index} has no valid ASCII name")
        name = raw.decode("ascii")
        code, rank = e[16], e[17]
        if code not in DTYPES:
            self._fail(f"array '{name}' has unknown dtype code {code}")
        if not 1 <= rank <= 4:
            self._fail(f"array '{name}' has rank {rank}, not 1 to 4")
        dims = struct.unpack_from("<4Q", e, 24)
        if any(dims[rank:]):
            self._fail(f"array '{name}' has sizes beyond its rank {rank}")
        dims = dims[:rank]
        offset, length = struct.unpack_from("<2Q", e, 56)
        want = DTYPES[code].itemsize
        for d in dims:
            want *= d  # Python integers: no overflow, unlike a fixed-width product
        if length != want:
            self._fail(f"array '{name}' length {length} disagrees with its shape "
                       f"{list(dims)} ({want} bytes)")
        if offset % ALIGN or offset < ALIGN or offset + length > self._meta_offset:
            self._fail(f"array '{name}' at offset {offset} ({length} bytes) lies outside the "
                       f"data area {ALIGN}..{self._meta_offset} or is not {ALIGN}-aligned")
        return {"name": name, "code": code, "dims": tuple(dims), "offset": offset,
                "length": length, "sha256": bytes(e[72:104])}

    def _map_arrays(self):
        spans = sorted((a["offset"], a["offset"] + a["length"], a["name"])
                       for a in self._entries if a["length"])
        for (_, end, first), (start, _, second) in zip(spans, spans[1:]):
            if start < end:
                self._fail(f"arrays '{first}' and '{second}' overlap")
        self.arrays = {}
        for a in self._entries:
            if a["name"] in self.arrays:
                self._fail(f"array '{a['name']}' appears twice")
            dt = DTYPES[a["code"]]
            if a["length"]:
                arr = np.memmap(self.path, dtype=dt, mode="r", offset=a["offset"],
                                shape=a["dims"])
            else:
                arr = np.empty(a["dims"], dtype=dt)
                arr.flags.writeable = False
            self.arrays[a["name"]] = arr

    def _check_metadata(self):
        m = self.metadata
        for name in ("images", "labels", "item"):
            if name not in self.arrays:
                self._fail(f"array '{name}' is missing")
        self.images, self.labels, self.item = (self.arrays[k] for k in ("images", "labels", "item"))
        codes = {a["name"]: a["code"] for a in self._entries}
        self.split = m.get("split")
        self.layout = m.get("layout")
        self.dtype = m.get("dtype")
        self.record_depth = m.get("record_depth")
        self.classes = m.get("classes")
        if self.layout not in ("nhwc", "nchw"):
            self._fail(f"metadata layout {self.layout!r} is not nhwc or nchw")
        if self.dtype not in IMAGE_DTYPES or codes["images"] != IMAGE_DTYPES[self.dtype]:
            self._fail(f"metadata dtype {self.dtype!r} disagrees with the images array")
        if self.record_depth not in (8, 16):
            self._fail(f"metadata record_depth {self.record_depth!r} is not 8 or 16")
        if not isinstance(self.classes, list):
            self._fail("metadata has no class list")
        if self.images.ndim != 4:
            self._fail(f"images has rank {self.images.ndim}, expected 4")
        n = self.images.shape[0]
        if m.get("records") != n:
            self._fail(f"metadata says {m.get('records')} records, images holds {n}")
        if codes["labels"] != 3 or self.labels.shape != (n,):
            self._fail(f"labels is not an i32 array of {n} records")
        if codes["item"] != 4 or self.item.shape != (n,):
            self._fail(f"item is not a u32 array of {n} records")
        if self.layout == "nhwc":
            _, self.height, self.width, self.channels = self.images.shape
        else:
            _, self.channels, self.height, self.width = self.images.shape
        if n and (self.labels.min() < -1 or self.labels.max() >= len(self.classes)):
            self._fail(f"labels outside -1..{len(self.classes) - 1} (the class list)")

    # -- what the file says --

    def __len__(self):
        return self.images.shape[0]

    def __repr__(self):
        return (f"<kten.KtenFile {self.path!r}: {self.split}, {len(self)} records, "
                f"{self.dtype} {self.layout} C={self.channels} H={self.height} W={self.width}>")

    @property
    def statistics(self):
        """This split's statistics object (docs/statistics.md), or None for an empty split."""
        return self.metadata.get("statistics")

    @property
    def training_statistics(self):
        """The training split's statistics object: the ones kiln normalises with. Train files
        carry them as `statistics`, validation and test files as `training_statistics`."""
        if self.split == "train":
            return self.metadata.get("statistics")
        return self.metadata.get("training_statistics")

    @property
    def mean(self):
        """Per-channel mean of the training split in [0,1] scale (`mean_unit`), or None when the
        training split is empty."""
        return _channels_of(self.training_statistics, "mean_unit", self.path)

    @property
    def std(self):
        """Per-channel population standard deviation of the training split in [0,1] scale
        (`std_unit`), or None when the training split is empty."""
        return _channels_of(self.training_statistics, "std_unit", self.path)

    @property
    def recipe(self):
        """The recipe object of the manifest.json beside the file, after checking that its
        SHA-256 is the file's `recipe_sha256` (so the manifest belongs to this file); None when
        there is no manifest.json beside it."""
        if self._recipe is None:
            man = os.path.join(os.path.dirname(os.path.abspath(self.path)), "manifest.json")
            if not os.path.exists(man):
                return None
            try:
                with builtins.open(man, "rb") as f:
                    recipe = json.loads(f.read().decode("utf-8"))["recipe"]
            except (OSError, UnicodeDecodeError, ValueError, KeyError, TypeError) as e:
                raise KtenError(man, f"cannot read the recipe ({e})") from None
            # kiln hashes the recipe object as it serialises it: two-space indent, keys in order.
            text = json.dumps(recipe, indent=2, ensure_ascii=False).encode("utf-8")
            if hashlib.sha256(text).hexdigest() != self.metadata.get("recipe_sha256"):
                self._fail(f"recipe in {man} is not the one this file was packed with "
                           "(recipe_sha256 differs)")
            self._recipe = recipe
        return self._recipe

    def verify(self):
        """Recomputes the SHA-256 of every array and compares it with the header; raises
        KtenError naming the first array that differs."""
        for a in self._entries:
            h = hashlib.sha256()
            arr = self.arrays[a["name"]]
            if a["length"]:
                flat = arr.reshape(-1).view(np.uint8)
                step = 1 << 24
                for start in range(0, flat.shape[0], step):
                    h.update(flat[start:start + step])
            if h.digest() != a["sha256"]:
                self._fail(f"array '{a['name']}' does not match the SHA-256 in its header "
                           "(the file is damaged)")
        return True

    @property
    def fingerprint(self):
        """SHA-256 of the 4096-byte header, which holds every array's and the metadata's digest:
        equal fingerprints mean the same file contents (a rebuild changes it)."""
        return hashlib.sha256(self._head).hexdigest()

    # -- conversion to what a network eats --

    def converter(self, normalise=True):
        """A function that turns a block of stored records [n, ...] into float32-ready float
        values [n, C, H, W] (see to_float). Raises KtenError when normalise=True and there are
        no training statistics."""
        c = self.channels
        transpose = self.layout == "nhwc"

        def shape(v):
            return np.array(v, dtype=np.float64).reshape(c, 1, 1)

        def nonzero(v):  # kiln divides a channel whose std is 0 by 1 (docs/pixels.md)
            return [s if s else 1.0 for s in v]

        if self.dtype == "f32":
            norm = self.metadata.get("normalisation") or {}
            mean, std = norm.get("mean_unit"), norm.get("std_unit")
            if not mean or not std or len(mean) != c or len(std) != c:
                self._fail("f32 file without per-channel normalisation values")
            if normalise:
                convert = np.asarray
            else:
                mean, std = shape(mean), shape(nonzero(std))

                def convert(v):  # undoes kiln's (v / M - mean) / std
                    return v * std + mean
        else:
            m = 65535.0 if self.record_depth == 16 else 255.0
            if not normalise:
                def convert(v):
                    return v / m
            else:
                if self.mean is None or self.std is None:
                    self._fail("no training statistics to normalise with (the training split "
                               "is empty); use normalise=False")
                if len(self.mean) != c or len(self.std) != c:
                    self._fail(f"training statistics have {len(self.mean)} channels, images {c}")
                mean, std = shape(self.mean), shape(nonzero(self.std))

                def convert(v):  # in double precision, as kiln computes --dtype f32
                    return (v / m - mean) / std
        if transpose:
            return lambda records: convert(records.transpose(0, 3, 1, 2))
        return convert

    def to_float(self, start=0, stop=None, normalise=True):
        """Records start..stop as a new float32 array [n, C, H, W] (the layout torch expects,
        whatever the file's layout). normalise=True gives (v / M - mean) / std with the
        training split's [0,1]-scale statistics (M = 255 or 65535), computed in double precision
        and rounded to float32 as kiln computes --dtype f32, so a u8 or u16 file gives exactly
        the numbers of the f32 file of the same recipe; normalise=False gives v / M in [0,1].
        f32 files are stored normalised: normalise=False undoes it (to within rounding)."""
        stop = len(self) if stop is None else min(stop, len(self))
        start = min(max(start, 0), stop)
        n = stop - start
        convert = self.converter(normalise)
        out = np.empty((n, self.channels, self.height, self.width), dtype=np.float32)
        block = max(1, BLOCK_VALUES // max(1, self.channels * self.height * self.width))
        for b in range(0, n, block):
            out[b:b + block] = convert(self.images[start + b:start + min(n, b + block)])
        return out

    def load(self, normalise=True, max_bytes=None):
        """The whole split in memory: (images float32 [N, C, H, W], labels int64 [N]), as
        to_float() describes. Refuses with MemoryError when the result would take more than
        max_bytes (default: half of the memory the system reports available)."""
        need = len(self) * (self.channels * self.height * self.width * 4 + 8)
        limit = _available_memory() // 2 if max_bytes is None else max_bytes
        if limit is not None and need > limit:
            raise MemoryError(f"{self.path}: the split needs {need} bytes in memory, more than "
                              f"{limit}; read it record by record (kten.Dataset) instead")
        return self.to_float(normalise=normalise), self.labels.astype(np.int64)


def _available_memory():
    """MemAvailable from /proc/meminfo in bytes, or None where the system does not say."""
    try:
        with builtins.open("/proc/meminfo") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return None


def open(path, verify=False):  # noqa: A001 - kten.open, like gzip.open
    """Opens a .kten file: validates the header, the array table and the metadata digest
    against docs/format.md and memory-maps the arrays. verify=True also recomputes every
    array's SHA-256 (reads the whole file). Raises KtenError naming the file and the problem."""
    return KtenFile(path, verify=verify)


def load(path, normalise=True, verify=False, max_bytes=None):
    """Loads a whole split into memory: (float32 [N, C, H, W], int64 [N]); see KtenFile.load."""
    return KtenFile(path, verify=verify).load(normalise=normalise, max_bytes=max_bytes)


def __getattr__(name):
    # The torch side is imported on first use, so `import kten` works without torch.
    if name in ("Dataset", "load_tensors"):
        try:
            from . import _torch
        except ImportError as e:
            raise ImportError(f"kten.{name} needs PyTorch ({e}); on Debian: "
                              "apt-get install python3-torch") from e
        return getattr(_torch, name)
    raise AttributeError(f"module 'kten' has no attribute '{name}'")
