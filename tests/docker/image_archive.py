"""Reading the image archive `podman save --format docker-archive` writes (the format
`docker save` writes too) with the standard library only: ``manifest.json`` names the
image's configuration and its layers, the configuration lists each layer's diff id (the
sha256 of the layer tar), and the configuration file's own sha256 is the image id."""

from __future__ import annotations

import hashlib
import json
import tarfile
from dataclasses import dataclass


@dataclass(frozen=True)
class ArchivedImage:
    """The one image of an archive: its id, configuration, the diff ids of its layers (as
    computed here) and every path in those layers."""

    image_id: str
    config: dict
    diff_ids: list[str]
    paths: frozenset[str]


class _Hashing:
    """A read-only file wrapper that hashes what is read through it."""

    def __init__(self, raw) -> None:
        self.raw, self.sha = raw, hashlib.sha256()

    def read(self, n: int = -1) -> bytes:
        data = self.raw.read(n)
        self.sha.update(data)
        return data

    def drain(self) -> str:
        while self.read(1 << 20):
            pass
        return "sha256:" + self.sha.hexdigest()


def _layer(archive: tarfile.TarFile, name: str) -> tuple[str, set[str]]:
    """The diff id of one layer and the paths in it."""
    stream = _Hashing(archive.extractfile(name))
    with tarfile.open(fileobj=stream, mode="r|") as layer:
        paths = {m.name.removeprefix("./") for m in layer}
    return stream.drain(), paths


def read_archive(path: str) -> ArchivedImage:
    """Open ``path`` and check it: one image whose configuration hashes to its id and whose
    layers hash to the diff ids that configuration lists."""
    with tarfile.open(path) as archive:
        (entry,) = json.load(archive.extractfile("manifest.json"))
        raw_config = archive.extractfile(entry["Config"]).read()
        config = json.loads(raw_config)
        diff_ids, paths = [], set()
        for name in entry["Layers"]:
            diff_id, layer_paths = _layer(archive, name)
            diff_ids.append(diff_id)
            paths |= layer_paths
    assert diff_ids == config["rootfs"]["diff_ids"], "layers differ from the configuration"
    return ArchivedImage(hashlib.sha256(raw_config).hexdigest(), config, diff_ids,
                         frozenset(paths))
