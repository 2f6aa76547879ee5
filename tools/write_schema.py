"""Write the JSON Schemas in docs/: the vehicle file (docs/vehicle-format.json, from core/vehicle.py), a row of
the measurement file (docs/measurement-format.json, from core/measurements.py) and the calibration file
(docs/calibration-format.json, from core/calibration.py).

Run after any change to those models: python tools/write_schema.py
(tests/test_vehicle_file.py::test_docs_schema_is_current, tests/test_measurements.py and
tests/test_calibration.py fail while a file is stale). The same schemas are printed by
``wheelreach schema [vehicle|measurements|calibration]``.
"""

from __future__ import annotations

import json
from pathlib import Path

from core.calibration import calibration_schema
from core.measurements import measurement_schema
from core.vehicle import json_schema

DOCS = Path(__file__).resolve().parents[1] / "docs"
OUT = DOCS / "vehicle-format.json"
SCHEMAS = {OUT: json_schema, DOCS / "measurement-format.json": measurement_schema,
           DOCS / "calibration-format.json": calibration_schema}


def main() -> None:
    DOCS.mkdir(exist_ok=True)
    for path, schema in SCHEMAS.items():
        path.write_text(json.dumps(schema(), indent=2) + "\n")
        print(f"wrote {path}")


if __name__ == "__main__":
    main()
