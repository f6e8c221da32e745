"""PPMd variant H (prediction by partial matching) through pyppmd."""

from __future__ import annotations

from .base import Compressor, Param


class Ppmd(Compressor):
    name = "ppmd"
    summary = "PPMd var. H context modelling; no window, a model memory; concatenation only"
    params = (
        Param("order", 2, 64, 32, "model order (also reachable as level)"),
        Param("memory", 1, 2048, 256, "model memory in MiB; a full model restarts"),
    )
    # pyppmd releases and retakes the GIL around every symbol, so threads only slow it down.
    releases_gil = False
    window_source = "no window: the model restarts when its memory is full"

    @property
    def window_bytes(self) -> None:
        return None

    @staticmethod
    def library_version() -> str:
        import pyppmd  # imported on use: it costs more start-up time than every other adapter

        return "pyppmd-" + str(pyppmd.__version__)

    def size(self, data: bytes) -> int:
        import pyppmd

        encoder = pyppmd.Ppmd7Encoder(self.setting("order"), self.setting("memory") << 20)
        return len(encoder.encode(data)) + len(encoder.flush(endmark=False))
