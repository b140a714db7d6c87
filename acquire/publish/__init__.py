"""Unit records and station states published to an MQTT broker, with the store as the outbox.

- :mod:`~acquire.publish.target`: the broker URL (``mqtt://host[:port]/<prefix>``) and the topics;
- :mod:`~acquire.publish.message`: the JSON of a unit record and of a station's status;
- ``unit-record.schema.json`` and ``station-status.schema.json``: the JSON Schemas (draft
  2020-12) of the unit record and of the station's status;
- :mod:`~acquire.publish.link`: one MQTT connection (paho-mqtt), publishing at QoS 1;
- :mod:`~acquire.publish.sending`: units from the store's outbox, sent in order, the position
  moved only after the broker's acknowledgement;
- :mod:`~acquire.publish.publisher`: the station's watcher, on a thread of its own.
"""
