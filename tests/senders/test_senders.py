"""The robot-side senders (Java and Python) against a live receiver on loopback:
every message arrives intact, in order, and is recomputed, with the team's own
signals (``put``) recorded by name."""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from receiver.formats.recording import read_recording
from receiver.live.serve import ServeConfig
from tests.live.harness import handled, live_receiver, wait_until

SENDERS = Path(__file__).resolve().parents[2] / "receiver" / "senders"
N = 300

DRIVER = """
import podwatch.OdometrySender;

public class Drive {
    public static void main(String[] args) throws Exception {
        int n = Integer.parseInt(args[2]);
        try (OdometrySender sender = new OdometrySender("practice-bot", args[0], Integer.parseInt(args[1]), 1e6)) {
            sender.sendReset(new long[] {0, 0, 0}, 0.0, 0.0, 0.0);
            for (int k = 1; k < n; k++) {
                sender.put("arm.angle", 0.5 * k);
                if (k % 3 == 0) {
                    sender.put("lift_2", -k);
                }
                sender.put("arm.angle", 0.5 * k);  // again: the latest value wins
                sender.put("broken", Double.NaN);  // skipped and counted
                sender.send(new long[] {10L * k, -7L * k, 3L * k}, 0.5 * k, -0.25 * k, 0.001 * k);
                Thread.sleep(1);
            }
            String refused = "";
            for (String bad : new String[] {"arm angle", "", "x".repeat(33), null}) {
                try {
                    sender.put(bad, 1.0);
                } catch (IllegalArgumentException e) {
                    refused += "r";
                }
            }
            OdometrySender spare = new OdometrySender("spare", "127.0.0.1", 9, 1.0);
            for (int i = 0; i < 32; i++) {
                spare.put("s" + i, i);
            }
            try {
                spare.put("s32", 1.0);
            } catch (IllegalArgumentException e) {
                refused += "33";
            }
            spare.close();
            Thread.sleep(200);
            System.out.println(sender.sent() + " " + sender.dropped() + " " + sender.skippedSignals() + " " + refused);
        }
    }
}
"""


def _expected_pose(k):
    return (0.5 * k, -0.25 * k, 0.001 * k)


def _check_recording(path):
    data = read_recording(path)
    cols = data.robots["practice-bot"]
    assert cols.seq.tolist() == list(range(N))
    assert cols.ticks.tolist() == [[10 * k, -7 * k, 3 * k] for k in range(N)]
    assert [tuple(p) for p in cols.pose.tolist()] == [_expected_pose(k) for k in range(N)]
    assert cols.reset.tolist() == [True] + [False] * (N - 1)
    assert (cols.loop[1:] > 0).all()  # the sender measures the loop period itself
    # the signals, by name, in the order they first came; NaN where a message did not carry one
    assert list(cols.signals) == ["arm.angle", "lift_2"]
    expected_arm = [np.nan] + [0.5 * k for k in range(1, N)]
    expected_lift = [-float(k) if k and k % 3 == 0 else np.nan for k in range(N)]
    np.testing.assert_array_equal(cols.signals["arm.angle"], expected_arm)
    np.testing.assert_array_equal(cols.signals["lift_2"], expected_lift)


@pytest.fixture
def receiver(tmp_path, practice_profile):
    config = ServeConfig({"practice-bot": practice_profile}, udp=("127.0.0.1", 0), record=tmp_path / "rec.jsonl")
    with live_receiver(config) as live:
        yield live
    _check_recording(tmp_path / "rec.jsonl")


def test_java_sender(tmp_path, receiver):
    javac, java = shutil.which("javac"), shutil.which("java")
    assert javac and java, "the Java sender test needs a JDK: apt-get install default-jdk-headless (bash .ci/run does)"
    (tmp_path / "Drive.java").write_text(DRIVER)
    source = SENDERS / "java" / "podwatch" / "OdometrySender.java"
    subprocess.run([javac, "-d", str(tmp_path), str(source), str(tmp_path / "Drive.java")], check=True)
    host, port = receiver.udp.address
    done = subprocess.run(
        [java, "-cp", str(tmp_path), "Drive", host, str(port), str(N)], check=True, capture_output=True, text=True
    )
    assert done.stdout.split() == [str(N), "0", str(N - 1), "rrrr33"]  # all sent, none dropped, NaNs skipped
    wait_until(lambda: handled(receiver) == N, "every message from the Java sender")
    assert sum(receiver.hub.errors.values()) == 0


def test_python_sender(receiver):
    spec = importlib.util.spec_from_file_location("podwatch_sender", SENDERS / "python" / "podwatch_sender.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    host, port = receiver.udp.address
    with module.OdometrySender("practice-bot", host, port, max_rate_hz=1e6) as sender:
        assert sender.send([0, 0, 0], pose=(0.0, 0.0, 0.0), reset=True)
        for k in range(1, N):
            assert sender.put("arm.angle", 0.5 * k)
            if k % 3 == 0:
                assert sender.put("lift_2", np.int64(-k))  # numpy numbers are numbers too
            assert not sender.put("broken", float("nan"))  # skipped and counted
            assert sender.send([10 * k, -7 * k, 3 * k], pose=_expected_pose(k))
            wait_until(lambda k=k: handled(receiver) == k + 1, "the message just sent")
    assert sender.sent == N and sender.dropped == 0 and sender.skipped_signals == N - 1


def test_python_sender_caps_the_rate_and_refuses_bad_ids():
    spec = importlib.util.spec_from_file_location("podwatch_sender", SENDERS / "python" / "podwatch_sender.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    with pytest.raises(ValueError, match="robot id must be"):
        module.OdometrySender("bad name")
    with module.OdometrySender("practice-bot", "127.0.0.1", 9, max_rate_hz=1.0) as sender:
        assert sender.send([1, 2, 3])
        assert not sender.send([1, 2, 3])  # within a second of the last: skipped
        assert sender.seq == 1


def test_python_sender_refuses_bad_signals_and_keeps_them_past_a_capped_send():
    spec = importlib.util.spec_from_file_location("podwatch_sender", SENDERS / "python" / "podwatch_sender.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    with module.OdometrySender("practice-bot", "127.0.0.1", 9, max_rate_hz=1.0) as sender:
        for name in ("arm angle", "", "x" * 33, None, "\u00e4rm"):
            with pytest.raises(ValueError, match="signal name must be 1-32 of A-Z a-z 0-9 _ . -"):
                sender.put(name, 1.0)
        for value in ("1.5", None, True, [1.0]):
            with pytest.raises(ValueError, match="must be a number"):
                sender.put("arm", value)
        assert not sender.put("arm", float("inf")) and not sender.put("arm", 10**400)
        assert sender.skipped_signals == 2
        for k in range(32):
            sender.put(f"s{k}", k)
        sender.put("s0", 5.0)  # a name already waiting may change
        with pytest.raises(ValueError, match="at most 32 signals per message"):
            sender.put("s32", 1.0)
        assert sender.send([1, 2, 3]) and sender._signals == {}  # sent with the message
        sender.put("arm", 2.0)
        assert not sender.send([1, 2, 3])  # capped: the signal waits for the next message
        assert sender._signals == {"arm": 2.0}
