"""Reading GeoPackages back with Python's own sqlite3 and checking them with GDAL's strict
validator (the one `make test` runs), independently of the service."""

import sqlite3
import subprocess
from pathlib import Path


def layer_rows(gpkg, layer):
    """Every row of `layer`, in fid order."""
    with sqlite3.connect(f"file:{gpkg}?mode=ro", uri=True) as db:
        return db.execute(f'SELECT * FROM "{layer}" ORDER BY 1').fetchall()


def layers(gpkg):
    """The tables listed in gpkg_contents."""
    with sqlite3.connect(f"file:{gpkg}?mode=ro", uri=True) as db:
        return sorted(r[0] for r in db.execute("SELECT table_name FROM gpkg_contents"))


def validate(gpkg):
    """GDAL's GeoPackage validator in strict mode (OGC 12-128r18 requirements)."""
    result = subprocess.run(
        ["/usr/bin/python3", "-m", "osgeo_utils.samples.validate_gpkg", "-k", "--extra",
         "--warning-as-error", str(gpkg)],
        capture_output=True, text=True, timeout=300)
    assert result.returncode == 0, f"{gpkg}: {result.stdout}{result.stderr}"


def staging_files(workspace):
    """Files a tool stages before publishing (hidden, `.NAME.stance-staging-PID…`)."""
    return [p for p in Path(workspace).rglob(".*stance-staging*")]


def key_results(summary):
    """The summary's key results without the timings (`…_time_s`), which differ run to run."""
    def strip(value):
        if isinstance(value, dict):
            return {k: strip(v) for k, v in value.items() if not k.endswith("_time_s")}
        if isinstance(value, list):
            return [strip(v) for v in value]
        return value
    return strip(summary["results"])
