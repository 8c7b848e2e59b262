"""alveary: spatial and time queries over hexagonal, equal-area data cubes."""

from alveary._errors import (
    AlvearyError,
    ChunkDecodeError,
    CubeFormatError,
    DeadlineExceeded,
    GridError,
    IngestError,
    InvalidInput,
    LimitExceeded,
    NotFound,
    RateLimited,
    StoreUnavailable,
)

__version__ = "0.1.0"

__all__ = [
    "AlvearyError",
    "ChunkDecodeError",
    "CubeFormatError",
    "DeadlineExceeded",
    "GridError",
    "IngestError",
    "InvalidInput",
    "LimitExceeded",
    "NotFound",
    "RateLimited",
    "StoreUnavailable",
    "__version__",
]
