"""Tag routes of the invented Kestrel Ridge unit KR-GT1, built from a real plant file.

The Sparkplug and OPC UA tests address tags by metric / NodeId instead of an MQTT topic; the
routes (unit, measurement, compiled unit converter, plausible and physical ranges) are the
ones ``daemon.config.load_plant`` and ``Decoder.from_plant`` make for the MQTT feed, so the
values go through exactly the checks of a live plant.
"""

from __future__ import annotations

from pathlib import Path

from live_support import plant_toml

from daemon.config import load_plant
from daemon.feeds.decode import Decoder, DecoderLimits, TagRoute

UNIT = "KR-GT1"


def kestrel_routes(tmp_path: Path) -> tuple[dict[str, TagRoute], DecoderLimits]:
    """measurement → route for every tag of KR-GT1, and the plant's decoder limits."""
    path = tmp_path / "kestrel-ridge-typed.toml"
    path.write_text(
        plant_toml(
            prefix="kr-typed",
            broker_port=1883,
            database_url=f"sqlite:///{tmp_path / 'unused.db'}",
            http_port=8089,
            client_id="brayscope-typed-test",
        )
    )
    plant = load_plant(path)
    decoder = Decoder.from_plant(plant)
    return {r.measurement: r for r in decoder.routes() if r.unit == UNIT}, decoder.limits
