package podwatch;

import java.io.IOException;
import java.net.DatagramPacket;
import java.net.DatagramSocket;
import java.net.InetAddress;
import java.net.SocketException;
import java.net.UnknownHostException;
import java.nio.charset.StandardCharsets;
import java.util.concurrent.ArrayBlockingQueue;
import java.util.concurrent.BlockingQueue;
import java.util.concurrent.TimeUnit;

/**
 * Streams a robot's raw tracking-wheel counts and its own pose to podwatch
 * over UDP (wire protocol v1), using the Java standard library only.
 *
 * <p>Copy this file into your robot code and change the package line to
 * yours. Create one sender when the op mode starts, call {@link #send} once
 * per loop right after you read the encoders and update your odometry, and
 * {@link #close} when the op mode stops:
 *
 * <pre>
 *   OdometrySender podwatch = OdometrySender.broadcast("practice-bot");   // in init
 *   ...
 *   podwatch.put("arm.angle", arm.getCurrentPosition());                 // optional: your own signals
 *   podwatch.send(new long[] {left.getCurrentPosition(), right.getCurrentPosition(),
 *                 back.getCurrentPosition()}, pose.x, pose.y, pose.heading);  // every loop
 *   ...
 *   podwatch.close();                                                      // in stop
 * </pre>
 *
 * <p>The counts go in the order of the [[wheel]] tables of the robot
 * profile; the pose in the units and conventions the profile's [reported]
 * table declares. {@link #send} never blocks the loop: it builds one short
 * string and hands it to a background thread through a small queue; when the
 * queue is full (the network is stuck) the sample is dropped and counted in
 * {@link #dropped()}. A rate cap keeps a fast loop from flooding the network.
 *
 * <p>{@link #put} adds a signal of your own (a motor power, an arm angle) to
 * the next message that goes out, as its "data"; podwatch records it by name.
 * A name of other characters than A-Z a-z 0-9 _ . - (or longer than 32), or a
 * 33rd name before a message goes out, is a mistake in the robot code: it
 * throws IllegalArgumentException at once, so it shows the first time the
 * loop runs. A value that is NaN or infinite (a sensor or a division can give
 * one mid-match) is skipped and counted in {@link #skippedSignals()}: the loop
 * never stops for it. Call put and send from the same thread (the loop's).
 */
public final class OdometrySender implements AutoCloseable {
    /** podwatch's default UDP port. */
    public static final int DEFAULT_PORT = 47474;
    /** Sends above this rate are skipped; podwatch bridges the gap from the cumulative counts. */
    public static final double DEFAULT_MAX_RATE_HZ = 200.0;
    private static final int QUEUE_CAPACITY = 64;
    /** Signals per message, as the wire protocol allows. */
    public static final int MAX_SIGNALS = 32;

    private final String robot;
    private final InetAddress address;
    private final int port;
    private final long minIntervalNanos;
    private final DatagramSocket socket;
    private final BlockingQueue<byte[]> queue = new ArrayBlockingQueue<>(QUEUE_CAPACITY);
    private final Thread worker;
    private final StringBuilder json = new StringBuilder(256);
    private volatile boolean running = true;
    private long seq = 0;
    private long lastSendNanos = Long.MIN_VALUE;
    private long lastLoopNanos = Long.MIN_VALUE;
    private volatile long dropped = 0;
    private volatile long sent = 0;
    private final String[] signalNames = new String[MAX_SIGNALS];
    private final double[] signalValues = new double[MAX_SIGNALS];
    private int signalCount = 0;
    private volatile long skippedSignals = 0;

    /**
     * @param robot robot id, 1-32 characters of A-Z a-z 0-9 _ . - (the profile's name)
     * @param host the laptop's address, or the network's broadcast address
     * @param port podwatch's UDP port (47474 unless you changed it)
     * @param maxRateHz at most this many samples per second are sent
     */
    public OdometrySender(String robot, String host, int port, double maxRateHz)
            throws UnknownHostException, SocketException {
        if (robot == null || !robot.matches("[A-Za-z0-9_.\\-]{1,32}")) {
            throw new IllegalArgumentException("robot id must be 1-32 of A-Z a-z 0-9 _ . -, got " + robot);
        }
        if (!(maxRateHz > 0)) {
            throw new IllegalArgumentException("maxRateHz must be positive, got " + maxRateHz);
        }
        this.robot = robot;
        this.address = InetAddress.getByName(host);
        this.port = port;
        this.minIntervalNanos = (long) (1e9 / maxRateHz);
        this.socket = new DatagramSocket();
        this.socket.setBroadcast(true);
        this.worker = new Thread(this::drain, "podwatch-sender");
        this.worker.setDaemon(true);
        this.worker.start();
    }

    /** A sender to the local network's broadcast address, so the laptop's address need not be known. */
    public static OdometrySender broadcast(String robot) throws UnknownHostException, SocketException {
        return new OdometrySender(robot, "255.255.255.255", DEFAULT_PORT, DEFAULT_MAX_RATE_HZ);
    }

    /** Counts and the robot's own pose (x, y, heading in the profile's declared conventions). */
    public void send(long[] ticks, double x, double y, double heading) {
        queueSample(ticks, true, x, y, heading, Double.NaN, false);
    }

    /** Counts only, for a robot without odometry of its own yet. */
    public void send(long[] ticks) {
        queueSample(ticks, false, 0, 0, 0, Double.NaN, false);
    }

    /** Counts, pose and the IMU heading (in the profile's heading unit). */
    public void send(long[] ticks, double x, double y, double heading, double imuHeading) {
        queueSample(ticks, true, x, y, heading, imuHeading, false);
    }

    /** Call once right after your code sets its pose (for example at the start of a run). */
    public void sendReset(long[] ticks, double x, double y, double heading) {
        queueSample(ticks, true, x, y, heading, Double.NaN, true);
    }

    /**
     * Adds a signal to the next message sent; the latest value of a name wins.
     *
     * @param name 1-32 characters of A-Z a-z 0-9 _ . -
     * @param value a finite number; NaN or infinite is skipped and counted in {@link #skippedSignals()}
     * @throws IllegalArgumentException for a bad name, or a 33rd name before the next message
     */
    public void put(String name, double value) {
        if (!isName(name)) {
            throw new IllegalArgumentException("signal name must be 1-32 of A-Z a-z 0-9 _ . -, got " + name);
        }
        int at = 0;
        while (at < signalCount && !signalNames[at].equals(name)) {
            at++;
        }
        if (at == MAX_SIGNALS) {
            throw new IllegalArgumentException("at most " + MAX_SIGNALS + " signals per message: " + name + " is one more");
        }
        if (!Double.isFinite(value)) {
            skippedSignals++;
            return;
        }
        signalNames[at] = name;
        signalValues[at] = value;
        if (at == signalCount) {
            signalCount++;
        }
    }

    /** Signal values skipped by {@link #put} because they were NaN or infinite. */
    public long skippedSignals() {
        return skippedSignals;
    }

    private static boolean isName(String name) {
        if (name == null || name.isEmpty() || name.length() > 32) {
            return false;
        }
        for (int i = 0; i < name.length(); i++) {
            char c = name.charAt(i);
            boolean ok = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9')
                || c == '_' || c == '.' || c == '-';
            if (!ok) {
                return false;
            }
        }
        return true;
    }

    /** Samples dropped because the queue to the network was full. */
    public long dropped() {
        return dropped;
    }

    /** Datagrams handed to the network. */
    public long sent() {
        return sent;
    }

    private void queueSample(long[] ticks, boolean hasPose, double x, double y, double heading, double imu,
                             boolean reset) {
        long now = System.nanoTime();
        double loop = lastLoopNanos == Long.MIN_VALUE ? Double.NaN : (now - lastLoopNanos) / 1e9;
        lastLoopNanos = now;
        if (!reset && lastSendNanos != Long.MIN_VALUE && now - lastSendNanos < minIntervalNanos) {
            return;
        }
        lastSendNanos = now;
        json.setLength(0);
        json.append("{\"v\":1,\"robot\":\"").append(robot)
            .append("\",\"seq\":").append(seq)
            .append(",\"t\":").append(now / 1e9)
            .append(",\"ticks\":[");
        for (int i = 0; i < ticks.length; i++) {
            if (i > 0) {
                json.append(',');
            }
            json.append(ticks[i]);
        }
        json.append(']');
        if (hasPose && Double.isFinite(x) && Double.isFinite(y) && Double.isFinite(heading)) {
            json.append(",\"pose\":[").append(x).append(',').append(y).append(',').append(heading).append(']');
        }
        if (Double.isFinite(imu)) {
            json.append(",\"imu\":").append(imu);
        }
        if (Double.isFinite(loop)) {
            json.append(",\"loop\":").append(loop);
        }
        if (reset) {
            json.append(",\"reset\":true");
        }
        if (signalCount > 0) {
            json.append(",\"data\":{");
            for (int i = 0; i < signalCount; i++) {
                if (i > 0) {
                    json.append(',');
                }
                json.append('"').append(signalNames[i]).append("\":").append(signalValues[i]);
            }
            json.append('}');
            signalCount = 0;
        }
        json.append('}');
        seq = (seq + 1) & 0xFFFFFFFFL;  // wraps at 2^32, as the protocol says
        if (!queue.offer(json.toString().getBytes(StandardCharsets.UTF_8))) {
            dropped++;
        }
    }

    private void drain() {
        while (running || !queue.isEmpty()) {
            try {
                byte[] payload = queue.poll(50, TimeUnit.MILLISECONDS);
                if (payload != null) {
                    socket.send(new DatagramPacket(payload, payload.length, address, port));
                    sent++;
                }
            } catch (InterruptedException e) {
                Thread.currentThread().interrupt();
                return;
            } catch (IOException e) {
                dropped++;  // no network right now: keep going, never stop the robot
            }
        }
    }

    /** Sends what is queued (waiting at most a second) and releases the socket. */
    @Override
    public void close() {
        running = false;
        try {
            worker.join(1000);
        } catch (InterruptedException e) {
            Thread.currentThread().interrupt();
        }
        socket.close();
    }
}
