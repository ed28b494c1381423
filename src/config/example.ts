/**
 * The commented example configuration, embedded so that the built CLI can print it (tsc does not copy
 * example.yaml into dist). Generated from src/config/example.yaml, which is the one to edit; then run
 *   UPDATE_CONFIG_EXAMPLE=1 npx vitest run tests/config-example.test.ts
 * (that test fails while the two differ).
 */
export const EXAMPLE_CONFIG: string = String.raw`# modewatch configuration: an example ("modewatch config example" prints it; "modewatch config check FILE"
# checks a file). The scenario is invented: a shop whose services publish one JSON record per request,
# e.g. {"endpoint": "/cart", "latency_ms": 41.7, "ts": 1717171717000}.
# Keys are camelCase; every key not marked "required" may be left out and gets the default shown.
# Relative paths are relative to this file's directory.
# Environment variables override the file, flags override the environment:
#   MODEWATCH_KAFKA_BROKERS (comma list), MODEWATCH_KAFKA_GROUP_ID, MODEWATCH_HTTP_LISTEN,
#   MODEWATCH_CHECKPOINT_DIRECTORY, MODEWATCH_LOG_LEVEL.

kafka:                                # needed by "modewatch run"; replay does not read it
  brokers: [127.0.0.1:9092]           # required: host:port, one or more
  clientId: modewatch
  groupId: modewatch                  # daemons with the same groupId share the partitions
  fromBeginning: false                # a partition with no committed offset starts at the latest record
  sessionTimeoutMs: 30000             # a daemon silent this long loses its partitions to the others (6000..1800000)
  consumerThread: true                # the Kafka consumer on a thread of its own: fetching overlaps modelling
  ssl: false                          # TLS to the brokers, with the system's CAs
  # sasl:                             # passwords never go in this file:
  #   mechanism: scram-sha-512        # plain | scram-sha-256 | scram-sha-512
  #   username: modewatch
  #   passwordEnv: KAFKA_PASSWORD     # an environment variable holding it, or
  #   passwordFile: ./kafka-password  # a file holding it (one of the two)
  topics:                             # required: all by name, or all by pattern
    - name: checkout-latency          # or  pattern: "^latency\\."  (a regular expression over topic names)
      decoding:                       # required: how a message becomes an event
        value: { format: json, path: latency_ms }   # or { format: number } | { format: csv, column: 2 }
        key: { from: field, path: endpoint }        # the stream is "checkout-latency:<endpoint>"
        time: { from: field, path: ts, unit: ms }   # default: the Kafka record timestamp
    - name: payments-latency
      decoding:
        value: { format: number }     # plain text numbers; the stream is the topic name
  deadLetterTopic: modewatch-dead-letters    # optional: rejected records are copied here

streams:
  maxStreams: 100000                  # streams beyond this are refused and counted
  recentValues: 256                   # values kept per stream for the histogram on its page
  defaults:                           # any monitor setting; these apply to every stream
    scale: log                        # identity | log | log1p | auto
    unit: milliseconds                # seconds, milliseconds, ..., bytes, kilobytes, ... or '' for none
    threshold: 18                     # alert threshold (ln of the run length between false alarms)
  rules:                              # the first rule that matches wins; its settings override the defaults
    - match: "checkout-latency:/cart*"     # a glob on the stream name: * any characters, ? one
      settings:
        known:                        # the normal shape of this stream, declared instead of learned
          - { weight: 0.8, family: lognormal, location: 40, spread: 0.3 }
          - { weight: 0.2, family: lognormal, location: 180, spread: 0.4 }
    - matchRegex: "^payments"         # or a regular expression
      settings: { currentWindow: 1000, minNewModeWeight: 0.02 }

checkpoint:
  store: directory                    # directory | kafka (a compacted topic, for daemons sharing a group)
  directory: ./modewatch-state
  topic: modewatch-checkpoints        # used by store: kafka
  everyEvents: 100000                 # checkpoint after this many events ...
  everySeconds: 30                    # ... or seconds, whichever comes first

alerts:
  sinks:                              # default: one log sink; [] sends alerts nowhere
    - type: log
    - type: alertmanager
      urls: [http://127.0.0.1:9093]
      resendSeconds: 60
      severity: warning
      labels: { team: checkout }
    - type: webhook
      url: https://hooks.example/modewatch
      # tokenEnv: WEBHOOK_TOKEN       # sent as a bearer token; or tokenFile: ./webhook-token
    - type: kafka
      topic: modewatch-alerts

http:
  listen: 127.0.0.1:9471              # /metrics, /healthz, /readyz, the API and the web page
  # webConfigFile: ./web-config.yml   # TLS and basic auth, in the format Prometheus exporters share
  externalUrl: http://127.0.0.1:9471  # links in alerts point here

logging:
  level: info                         # fatal | error | warn | info | debug | trace | silent
`;
