"""Reading an OCI image archive (the tar `podman save --format oci-archive` writes) with the
standard library only: its image index, manifest, configuration and layers, every blob
checked against its sha256 digest (OCI image-spec: image-layout, manifest, config)."""

from __future__ import annotations

import gzip
import hashlib
import json
import tarfile
from dataclasses import dataclass

LAYER_GZIP = "application/vnd.oci.image.layer.v1.tar+gzip"
LAYER_TAR = "application/vnd.oci.image.layer.v1.tar"


@dataclass(frozen=True)
class ArchiveImage:
    """The one image of an archive: its config digest, configuration, layer diff ids (sha256
    of each uncompressed layer, computed here) and the paths in its layers."""

    config_digest: str
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


def _blob(tar: tarfile.TarFile, digest: str):
    algo, hexdigest = digest.split(":", 1)
    return tar.extractfile(f"blobs/{algo}/{hexdigest}")


def _json_blob(tar: tarfile.TarFile, digest: str) -> dict:
    data = _blob(tar, digest).read()
    assert "sha256:" + hashlib.sha256(data).hexdigest() == digest, f"blob {digest} corrupt"
    return json.loads(data)


def _layer(tar: tarfile.TarFile, desc: dict) -> tuple[str, set[str]]:
    """The diff id of one layer and its paths; its stored bytes must match its digest."""
    stored = _Hashing(_blob(tar, desc["digest"]))
    if desc["mediaType"] == LAYER_GZIP:
        plain = _Hashing(gzip.GzipFile(fileobj=stored))
    else:
        assert desc["mediaType"] == LAYER_TAR, desc["mediaType"]
        plain = stored
    with tarfile.open(fileobj=plain, mode="r|") as layer:
        paths = {m.name.removeprefix("./") for m in layer}
    diff_id = plain.drain()
    assert stored.drain() == desc["digest"], f"layer {desc['digest']} corrupt"
    return diff_id, paths


def read_archive(path: str) -> ArchiveImage:
    """Open ``path`` and check it: an OCI layout with one image whose blobs all match their
    digests and whose layers decompress to the diff ids its configuration lists."""
    with tarfile.open(path) as tar:
        assert json.load(tar.extractfile("oci-layout"))["imageLayoutVersion"] == "1.0.0"
        (entry,) = json.load(tar.extractfile("index.json"))["manifests"]
        manifest = _json_blob(tar, entry["digest"])
        config = _json_blob(tar, manifest["config"]["digest"])
        diff_ids, paths = [], set()
        for desc in manifest["layers"]:
            diff_id, layer_paths = _layer(tar, desc)
            diff_ids.append(diff_id)
            paths |= layer_paths
    assert diff_ids == config["rootfs"]["diff_ids"], "layers differ from the configuration"
    return ArchiveImage(manifest["config"]["digest"], config, diff_ids, frozenset(paths))
