/**
 * The one registry of qband's coded errors and drop reasons.
 *
 * Every code has a meaning and a fix; docs/errors.md carries the same table and a test keeps the
 * two in step. A retired code stays here marked `retired: true` and is never reused.
 */
export interface ErrorCodeInfo {
  meaning: string;
  fix: string;
  retired?: boolean;
}

export const ERROR_CODES = {
  QB_E_USAGE: {
    meaning: 'The command line is not understood (unknown option, missing or malformed value); found before any file is opened, and always exit code 2.',
    fix: 'Run `qband <command> --help` and correct the call.',
  },
  QB_E_FILE_READ: {
    meaning: 'A file named on the command line or in the map cannot be read (missing, a directory, no permission).',
    fix: 'Check the path and permissions.',
  },
  QB_E_FFT_SIZE: {
    meaning: 'An FFT frame size is not a power of two between 32 and 4194304.',
    fix: 'Set analysis frame_size to a power of two such as 4096, 8192 or 16384.',
  },
  QB_E_FFT_LOAD: {
    meaning: 'The WebAssembly FFT module could not be loaded (neither its SIMD nor its plain build).',
    fix: 'Reinstall dependencies (`npm ci`) and check that Node is version 20 or later.',
  },
  QB_E_DSP_ARGUMENT: {
    meaning: 'A signal-processing step was given a value outside its range (overlap, averages, decimation, sample rate, buffer length, zone boundaries).',
    fix: 'Correct the value the message quotes; the message says what range was expected.',
  },
  QB_E_CONFIG_SYNTAX: {
    meaning: 'The asset map is not well-formed YAML.',
    fix: 'Correct the YAML at the line and column given (indentation, quotes, brackets).',
  },
  QB_E_CONFIG_UNKNOWN_KEY: {
    meaning: 'The asset map has a key qband does not know, or one that does not apply in that place.',
    fix: 'Fix the spelling (a suggestion is printed when one is close) or remove the key; see docs/asset-map.md.',
  },
  QB_E_CONFIG_TYPE: {
    meaning: 'A value in the asset map has the wrong type (text where a number belongs, a list where a mapping belongs, a non-finite number).',
    fix: 'Write the value in the type given after `must be` in the message.',
  },
  QB_E_CONFIG_RANGE: {
    meaning: 'A value in the asset map is outside its allowed range (fn_hz <= 0, q < 0.5, zeta outside (0, 1), a band that does not bracket fn, a descending speed range).',
    fix: 'Correct the value to lie in the range the message gives.',
  },
  QB_E_CONFIG_MISSING: {
    meaning: 'A required key is absent from the asset map.',
    fix: 'Add the key named in the message; docs/asset-map.md lists every required key.',
  },
  QB_E_CONFIG_CONFLICT: {
    meaning: 'Keys that exclude each other are given together (q with zeta, multiple with vanes, scale with sensitivity_mv_per_unit).',
    fix: 'Keep exactly one of the keys the message names.',
  },
  QB_E_CONFIG_DUPLICATE: {
    meaning: 'An id is used twice in the same list or a component lists an order or sensor twice, a key appears twice in one mapping, or a recording channel is bound twice.',
    fix: 'Give every asset, order, sensor and component its own id, and every channel one use.',
  },
  QB_E_CONFIG_REFERENCE: {
    meaning: 'An id in the asset map refers to an order or sensor that the asset does not define.',
    fix: 'Use an id defined in the orders or sensors list of the same asset, or define it there.',
  },
  QB_E_FILE_WRITE: {
    meaning: "An output file cannot be created or written.",
    fix: "Check that the directory exists, is writable and has free space.",
  },
  QB_E_WAV_FORMAT: {
    meaning: "A WAV file is not one qband can read: not RIFF/WAVE, an unsupported sample encoding, a sample rate outside 1 Hz to 1 MHz, more than 1024 channels, more than 1024 chunks before the data, or a corrupt or truncated header or data chunk.",
    fix: "Convert it to 16, 24 or 32-bit integer PCM or 32-bit float WAV (plain or WAVE_FORMAT_EXTENSIBLE), or copy the whole file again if it was cut short.",
  },
  QB_E_CSV_FORMAT: {
    meaning: "A CSV recording does not follow the layout `time_s,<channel>,...` with one plain decimal number per cell, has more than 1024 channels, or its time column is not uniformly spaced or implies a sample rate outside 1 Hz to 1 MHz.",
    fix: "Correct the line the message names; time steps must agree with the mean step to within a quarter of it.",
  },
  QB_E_RECORDING_TYPE: {
    meaning: "A recording's file name ends in neither .wav nor .csv.",
    fix: "Convert the recording to WAV or CSV and name it with that extension.",
  },
  QB_E_PROFILE_SYNTAX: {
    meaning: "A speed profile is not well-formed YAML.",
    fix: "Correct the YAML at the line and column given.",
  },
  QB_E_PROFILE_INVALID: {
    meaning: "A speed profile has a missing, unknown, mistyped or out-of-range key.",
    fix: "Correct each key the message lists (path, line, column); docs/simulate.md describes every key.",
  },
  QB_E_PROFILE_ASSET: {
    meaning: "A speed profile does not fit the asset it is run against (another asset id, an order id the asset lacks, a frequency at or above half the sample rate).",
    fix: "Use the asset's own order ids, pick the asset with --asset, or raise sample_rate_hz as the message says.",
  },
  QB_E_CHANNEL_MISSING: {
    meaning: 'The asset map binds a channel that the recording does not have, or a sensor of the asset has no `channel` (it is fed over MQTT only) and a recording is to be read or written.',
    fix: 'Check the sensors\' `channel` and `speed.channel` in the map against the recording\'s channel count (channels are numbered from 0); give every sensor the message names a `channel` to replay or simulate a recording.',
  },
  QB_E_SPEED_CSV: {
    meaning: 'A speed series file (CSV with columns time_s and rpm) has a missing column, a value that is not a finite number, a negative rpm or a time that does not increase.',
    fix: 'Correct each line the message lists; the header needs time_s and rpm, times in seconds must increase strictly, rpm must be >= 0.',
  },
  QB_E_PAYLOAD_ARGUMENT: {
    meaning: 'A sample-block or sequencer helper was given a value it cannot use: a block to encode that the payload forms cannot carry (seq outside 0..4294967295 for binary, t or a sample not finite, fs outside 1..1000000 Hz, no samples), a sample limit that is not a whole number >= 1, or a reorder window outside 0..1024.',
    fix: 'Correct the value the message quotes; docs/payloads.md gives every range.',
  },
  QB_E_CONFIG_INVALID: {
    meaning: "The agent was started with an asset map that is not valid; it refuses to run.",
    fix: "Run `qband check <map>`, fix every problem it lists, and start again.",
  },
  QB_E_CONFIG_RELOAD: {
    meaning: "A changed asset map could not be applied; the agent keeps running on the last good map.",
    fix: "Read the problems in the log line or the agent status message, fix the map and save it again.",
  },
  QB_E_NO_BROKER: {
    meaning: "The live agent has no broker to connect to.",
    fix: "Add `broker: { url: ... }` to the map or pass `--broker <url>`.",
  },
  QB_E_BROKER: {
    meaning: "The MQTT connection failed, dropped or refused a subscription; the agent keeps retrying.",
    fix: "Check the broker address, that it runs, the credentials and the ACL for the agent's client.",
  },
  QB_E_PUBLISH: {
    meaning: "A message could not be handed to the broker.",
    fix: "Check the broker connection and the ACL: the agent must be allowed to publish under its topic prefix.",
  },
  QB_E_SPARKPLUG_COMMAND: {
    meaning: "A Sparkplug command (NCMD) to the agent's edge node could not be decoded; it was ignored.",
    fix: "Send a Sparkplug B payload; `Node Control/Rebirth` set true asks the edge node for its births again.",
  },
  QB_E_INPUT_DROPPED: {
    meaning: "An input message (sample block, speed record) was not used; the log line gives the reason (see docs/payloads.md).",
    fix: "Fix the sender: payload form, sequence numbers, timestamps or sample rate, as the reason says.",
  },
  QB_E_COMMAND_REJECTED: {
    meaning: "An operator command was refused; a reply goes to `<prefix>/<asset>/command/rejected`.",
    fix: "Send a command with the body documented in docs/topics.md for a component and order of that asset; a `stale_command` was issued longer ago than `agent.max_command_age_s`: send it again if it still holds.",
  },
  QB_E_INTERNAL: {
    meaning: "A fault inside qband while handling one message; the agent carried on. Also a worker thread that failed as a whole: the log names its assets and the inputs lost; the worker is started again and its assets resume from their last state, unless it failed more than 3 times in 10 minutes (then they are no longer watched).",
    fix: "Report it with the log line; it is a defect of qband, not of your configuration. If the log says the assets are no longer watched, restart the agent.",
  },
  QB_E_CREDENTIALS: {
    meaning: "Broker credentials or TLS files are missing, contradictory or unreadable.",
    fix: "Set QBAND_MQTT_USERNAME with QBAND_MQTT_PASSWORD or QBAND_MQTT_PASSWORD_FILE, and make the --ca/--cert/--key files readable by the agent.",
  },
  QB_E_JOURNAL_TORN: {
    meaning: "The journal ended in a half-written or corrupt record (a power cut during a write); it was cut there and the agent carried on.",
    fix: "Nothing to do if it happened after a power loss; if it recurs, check the disk of the state directory.",
  },
  QB_E_JOURNAL_WRITE: {
    meaning: "The journal in the state directory cannot be written: alarm events and state are not durable.",
    fix: "Check that the state directory exists, is writable by the agent and has free space.",
  },
  QB_E_TRANSIENTS_READ: {
    meaning: "The transients saved in the state directory could not be read (a damaged or foreign file): the agent starts without them and identifies afresh.",
    fix: "Nothing to do; the file is rewritten with the next transient. If it recurs, check the disk of the state directory.",
  },
  QB_E_TRANSIENTS_WRITE: {
    meaning: "The transients could not be saved in the state directory: identification goes on, but a restart would start it afresh.",
    fix: "Check that the state directory exists, is writable by the agent and has free space.",
  },
  QB_E_OVERLOAD: {
    meaning: "The agent (or one worker thread, named in `worker`) spends more than 85 % of its time handling data: it sheds spectra (order amplitudes and severity) while speed and dwell decisions go on.",
    fix: "Give the agent fewer channels or a faster machine, raise analysis.decimation, or lower the sample rate at the gateway; see docs/security.md, 'Bounded resources'.",
  },
  QB_E_CONFIG_TOO_LARGE: {
    meaning: "The asset map is larger than 1 MiB, nests deeper than 64 levels, or its aliases (*name) expand it to more than 200000 values: qband does not read it.",
    fix: "Split the map between agents, remove the nesting the message points at (an asset map needs about eight levels), or write aliased parts out.",
  },
  QB_E_ASSET_UNKNOWN: {
    meaning: "The command names an asset (--asset) that the map does not have, or the map has several assets and none is named.",
    fix: "Name one of the asset ids the message lists with --asset.",
  },
  QB_E_RECORDING_EMPTY: {
    meaning: "A recording holds no samples: there is nothing to replay.",
    fix: "Check that the recording was written to the end; record again if it was cut short.",
  },
  QB_E_SAMPLE_RANGE: {
    meaning: "A recording holds samples that are not finite numbers or lie beyond +-1e6: they are counted, reported and treated as missing data, and the run goes on.",
    fix: "Check the sensor, its cabling and the recorder's scaling; the warning gives the count per channel.",
  },
  QB_E_RECORDING_RATE: {
    meaning: "A warning: the recording's sample rate leaves part of the map unmeasured (a component's fn at or above half the rate, or no severity band below it); the run goes on, dwell decisions still follow the speed.",
    fix: "Record at a higher rate (at least 2.56 times the highest frequency of interest, common practice) if those amplitudes matter.",
  },
  QB_E_PLAN_RANGE_USABLE: {
    meaning: "A warning of `qband plan`: the skip bands leave less of the operating range usable than the map's drive.min_usable_pct (default 50 %).",
    fix: "Review the bands with the site's engineers: moving a natural frequency (stiffening, mass) or narrowing the operating range may serve better than skipping most of it.",
  },
  QB_E_PLAN_NORMAL_SKIPPED: {
    meaning: 'A warning of `qband plan`: the normal operating point (drive.normal_rpm) lies inside a skip band, so the machine cannot run there without dwelling in a resonance.',
    fix: 'Move the operating point, or move the resonance (fn) out of the way; confirm the band by measurement first.',
  },
  QB_E_HTTP_ADDRESS: {
    meaning: 'The operator page cannot listen where --http says: the host:port is malformed, the port is taken, or the address is not on this machine.',
    fix: 'Give --http as host:port with a free port, e.g. 127.0.0.1:8080; check what else listens there.',
  },
  QB_E_HTTP_TOKEN: {
    meaning: "The operator page's token cannot be used: QBAND_HTTP_TOKEN_FILE cannot be read, or the token is shorter than 16 characters.",
    fix: 'Put a random token of at least 16 characters in QBAND_HTTP_TOKEN or in the file QBAND_HTTP_TOKEN_FILE names.',
  },
  QB_E_HTTP_FORBIDDEN: {
    meaning: "An acknowledge or shelve from the operator page came without the site's token, or with a wrong one, and was refused: without the token the page is read-only.",
    fix: 'Enter the token the site configured (QBAND_HTTP_TOKEN or QBAND_HTTP_TOKEN_FILE on the agent) in the page before acting.',
  },
} as const satisfies Record<string, ErrorCodeInfo>;

export type ErrorCode = keyof typeof ERROR_CODES;

/** An error a person can act on: a code from the registry and a message quoting the bad value. */
export class QbandError extends Error {
  readonly code: ErrorCode;
  constructor(code: ErrorCode, message: string, options?: { cause?: unknown }) {
    super(message, options);
    this.name = 'QbandError';
    this.code = code;
  }
}
