#!/usr/bin/env bash
# Enables RabbitMQ's MQTT plugin on a spare loopback port (127.0.0.1:1884 by default;
# QBAND_RABBIT_MQTT_PORT to change it) and waits until it answers an MQTT CONNECT. Idempotent:
# a second run changes nothing. Needs a running RabbitMQ node and root (or the
# rabbitmq user) for rabbitmqctl and the config file. Exits 0 when the plugin answers, 1 with
# one line saying why when it cannot be made to (CI prints that and goes on).
#
# The port is set twice on purpose: in /etc/rabbitmq/rabbitmq.conf, which the node reads only at
# boot (so a restart keeps it), and in the running node's application environment before the
# plugin starts, so enabling it needs no restart. Without the latter the plugin would start on
# its default 1883, which the machine's Mosquitto already holds.
set -uo pipefail
port="${QBAND_RABBIT_MQTT_PORT:-1884}"
conf="${RABBITMQ_CONFIG_FILE:-/etc/rabbitmq/rabbitmq.conf}"
conf="${conf%.conf}.conf"

fail() { echo "rabbitmq mqtt: $*" >&2; exit 1; }

# An MQTT 3.1.1 CONNECT (client id "qband-probe", guest/guest) answered with CONNACK code 0.
answers() {
  node -e '
    const net = require("net");
    const s = net.connect(Number(process.argv[1]), "127.0.0.1");
    const str = (t) => { const b = Buffer.from(t); return Buffer.concat([Buffer.from([b.length >> 8, b.length & 255]), b]); };
    const body = Buffer.concat([str("MQTT"), Buffer.from([4, 0xc2, 0, 10]), str("qband-probe"), str("guest"), str("guest")]);
    const done = (ok) => { s.destroy(); process.exit(ok ? 0 : 1); };
    s.on("connect", () => s.write(Buffer.concat([Buffer.from([0x10, body.length]), body])));
    s.on("data", (d) => done(d[0] === 0x20 && d[3] === 0));
    s.on("error", () => done(false));
    setTimeout(() => done(false), 2000);
  ' "$port"
}

if ! command -v rabbitmqctl >/dev/null; then
  answers && { echo "rabbitmq mqtt: answering on 127.0.0.1:$port (not configured here: no rabbitmqctl)"; exit 0; }
  fail "rabbitmqctl not found (RabbitMQ not installed)"
fi
rabbitmqctl -q status >/dev/null 2>&1 || fail "no RabbitMQ node running (start it with rabbitmq-server -detached)"

# Each key once; a line already there (another port, say) is left as the site wrote it.
if [ -w "$(dirname "$conf")" ]; then
  grep -q '^mqtt\.listeners\.tcp\.' "$conf" 2>/dev/null || printf 'mqtt.listeners.tcp.default = 127.0.0.1:%s\n' "$port" >>"$conf"
  grep -q '^mqtt\.sparkplug' "$conf" 2>/dev/null || printf 'mqtt.sparkplug = true\n' >>"$conf"
fi

# sparkplug: without it the plugin turns the dot of "spBv1.0" into a topic level separator, and
# subscribers receive Sparkplug messages under "spBv1/0/..." (docs/fleet.md). Read per connection.
rabbitmqctl -q eval "application:load(rabbitmq_mqtt), application:set_env(rabbitmq_mqtt, sparkplug, true), application:get_env(rabbitmq_mqtt, tcp_listeners) =:= {ok, [1883]} andalso application:set_env(rabbitmq_mqtt, tcp_listeners, [{\"127.0.0.1\", $port}])." >/dev/null \
  || fail "could not set the plugin's listener on the running node"
rabbitmq-plugins -q enable rabbitmq_mqtt >/dev/null || fail "rabbitmq-plugins enable rabbitmq_mqtt failed"

for _ in $(seq 1 30); do
  if answers; then echo "rabbitmq mqtt: answering on 127.0.0.1:$port"; exit 0; fi
  sleep 1
done
fail "the plugin is enabled but nothing answers MQTT on 127.0.0.1:$port after 30 s"
