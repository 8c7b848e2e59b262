"""One-shot job of deploy/compose.yaml: build the demo cube into an S3-protocol store.

``alveary build-demo`` writes to a local directory only, so this job does the same two
steps against a URL: it writes the invented district's monthly NetCDF files to a
temporary directory and ingests them with the demo's settings (area mean to level 14,
pyramid down to level 9), through the public ``publish_demo``.

Environment: ``ALVEARY_DEMO_URL`` (``s3://bucket/prefix``, required), ``ALVEARY_DEMO_DAYS``
(default 365) and the usual AWS variables: ``AWS_ENDPOINT_URL``, ``AWS_DEFAULT_REGION``,
``AWS_SHARED_CREDENTIALS_FILE`` (the keys stay in that file, not in the environment).
The bucket is created when missing. A cube already published there is left as it is,
so restarting the composition does not rebuild it. Exit status 0 on success.

The demo data are invented; they must never inform irrigation or any other decision.
"""

from __future__ import annotations

import os
import sys
from urllib.parse import urlparse


def ensure_bucket(bucket: str) -> None:
    """Create the bucket unless it exists (endpoint and keys from the AWS environment)."""
    import boto3
    from botocore.exceptions import ClientError

    client = boto3.client("s3")
    try:
        client.head_bucket(Bucket=bucket)
    except ClientError as exc:
        if exc.response.get("Error", {}).get("Code") not in ("404", "NoSuchBucket"):
            raise
        client.create_bucket(Bucket=bucket)


def build(url: str, days: int) -> int:
    """Publish the demo cube at ``url`` unless a cube is published there already."""
    import fsspec

    ensure_bucket(urlparse(url).netloc)
    if fsspec.filesystem("s3").exists(url.rstrip("/") + "/current.json"):
        print(f"demo-build: a cube is already published at {url}; nothing to do")
        return 0

    from alveary.ingest import publish_demo

    summary = publish_demo(url, days=days)
    print(summary.text())
    return 0


def main() -> int:
    """Check the environment (exit 2 naming the variable if it is wrong), then build."""
    url = os.environ.get("ALVEARY_DEMO_URL", "")
    parsed = urlparse(url)
    if parsed.scheme != "s3" or not parsed.netloc or not parsed.path.strip("/"):
        print(
            f"demo-build: ALVEARY_DEMO_URL must be s3://bucket/prefix, got {url!r}", file=sys.stderr
        )
        return 2
    days_text = os.environ.get("ALVEARY_DEMO_DAYS", "365")
    days = int(days_text) if days_text.isdigit() else 0
    if not 1 <= days <= 365:
        print(f"demo-build: ALVEARY_DEMO_DAYS must be 1..365, got {days_text!r}", file=sys.stderr)
        return 2
    return build(url, days)


if __name__ == "__main__":
    sys.exit(main())
