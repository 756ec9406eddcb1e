"""The page never says "receiving" over a receiver in trouble: the receiver's own problems
(the recording stopped, a worker down) lead the status line, and they and the link notes
sit under the link table."""

from __future__ import annotations

from dashboard import readout_texts, view
from dashboard.settings import Settings
from dashboard.sources import LiveSource
from dashboard.status import Badge
from dashboard.tabs import Station
from receiver.formats.protocol import decode
from receiver.live.health import WorkerEvent
from receiver.live.hub import Hub
from tests.live.serve_process import message


class Clock:
    def __init__(self, now: float) -> None:
        self.now = now

    def __call__(self) -> float:
        return self.now


def live_station() -> tuple[Station, Hub, Clock]:
    hub = Hub({})
    clock = Clock(1000.0)
    for seq in range(50):
        hub.ingest(*decode(message("practice-bot", seq, 0.01 * seq)), 999.5 + 0.01 * seq, "udp")
    hub.process(1000.0)
    return Station(live=LiveSource(hub, clock=clock)), hub, clock


def test_a_stopped_recording_and_a_failed_worker_lead_the_status_line():
    station, hub, _ = live_station()
    line = view.refresh(station.tab("t"), Settings(), None, 60.0, None).status
    assert [badge for badge, _ in line.badges] == [Badge.RECEIVING]
    assert line.detail.startswith("live \u00b7 practice-bot, ")
    hub.health.recording_started("recordings/podwatch-x.jsonl")
    hub.health.stop_recording("No space left on device")
    hub.health.worker("udp receive loop", WorkerEvent.CRASHED, "Bad file descriptor")
    hub.health.set_problem("mqtt", "MQTT broker 127.0.0.1:1883 gone (refused): retrying")
    refreshed = view.refresh(station.tab("t"), Settings(), None, 60.0, None)
    # Each of the receiver's troubles a badge of its own, ahead of the robot's; the words
    # after them, the other problems with them.
    assert refreshed.status.badges == ((Badge.WORKER_ERROR, "worker error"),
                                       (Badge.RECORDING_STOPPED, "recording stopped"), (Badge.RECEIVING, "receiving"))
    assert refreshed.status.detail.startswith(
        "udp receive loop failed: Bad file descriptor; restarting; recording stopped: No space left on device; "
        "MQTT broker 127.0.0.1:1883 gone (refused): retrying \u00b7 live \u00b7 practice-bot, "
    )
    table = readout_texts.link_table(refreshed.snapshots, refreshed.now, "practice-bot", refreshed.unattributed,
                                     refreshed.problems + refreshed.notes)
    assert table.endswith("<caption>udp receive loop failed: Bad file descriptor; restarting<br>recording stopped: "
                          "No space left on device<br>MQTT broker 127.0.0.1:1883 gone (refused): retrying</caption>"
                          "</table>")


def test_link_notes_and_refusals_share_the_caption_escaped():
    station, hub, _ = live_station()
    hub.health.set_note("udp", "udp 0.0.0.0:47474: receive buffer 8.0 MiB; the kernel dropped 12 datagrams")
    hub.health.set_note("x", "a <note>")
    refreshed = view.refresh(station.tab("t"), Settings(), None, 60.0, None)
    table = readout_texts.link_table(refreshed.snapshots, refreshed.now, None, {"not_json": 2},
                                     refreshed.problems + refreshed.notes)
    assert table.endswith("<caption>udp 0.0.0.0:47474: receive buffer 8.0 MiB; the kernel dropped 12 datagrams<br>"
                          "a &lt;note&gt;<br>refused before a robot could be named: not_json 2</caption></table>")
