"""Write docs/vehicle-format.json, the JSON Schema generated from core/vehicle.py.

Run after any change to the vehicle model: python tools/write_schema.py
(tests/test_vehicle_file.py::test_docs_schema_is_current fails while the file is stale).
The same schema is printed by ``wheelreach schema``.
"""

from __future__ import annotations

import json
from pathlib import Path

from core.vehicle import json_schema

OUT = Path(__file__).resolve().parents[1] / "docs" / "vehicle-format.json"


def main() -> None:
    OUT.parent.mkdir(exist_ok=True)
    OUT.write_text(json.dumps(json_schema(), indent=2) + "\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
