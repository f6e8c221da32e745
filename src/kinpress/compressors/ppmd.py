"""PPMd variant H (prediction by partial matching) through pyppmd."""

from __future__ import annotations

from .base import Compressor, Continued, Param
from .kept import AVAILABLE, Kept


class Ppmd(Compressor):
    name = "ppmd"
    summary = "PPMd var. H context modelling; no window, a model memory; concatenation only"
    params = (
        Param("order", 2, 64, 32, "model order (also reachable as level)"),
        Param("memory", 1, 2048, 256, "model memory in MiB; a full model restarts"),
    )
    continues = AVAILABLE
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

    def after(self, prefix: bytes) -> Continued:
        if not self.continues:
            return Continued(self, prefix)
        settings = (self.setting("order"), self.setting("memory"))
        return Kept(self, prefix, _RECIPE, lambda data: settings)


# The model after a prefix, kept in a helper process (see kept): fed the prefix once, each item
# from there.
_RECIPE = """
import pyppmd
def new(order, memory):
    encoder = pyppmd.Ppmd7Encoder(order, memory << 20)
    return (lambda data: len(encoder.encode(data))), (lambda: len(encoder.flush(endmark=False)))
"""
