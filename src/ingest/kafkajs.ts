/**
 * The one place modewatch loads kafkajs. Before kafkajs's modules load, two of them are replaced in Node's module
 * cache by ours, which give the same results for less CPU: its per-record decoder
 * (src/protocol/recordBatch/record/v0/decoder.js, by kafka-record-decoder.ts) and the constructor of its consumer
 * Batch (src/consumer/batch.js, by kafka-fetch-batch.ts). Only for the kafkajs version they were checked against
 * (kafkajs is no longer maintained, so its internals stay as they are); with another version, or when kafkajs was
 * already loaded on this thread, kafkajs keeps its own and works as before.
 *
 * Each thread has its own module cache: this runs on whichever thread imports this module first.
 */
import { createRequire, Module } from 'node:module';
import type * as Kafkajs from 'kafkajs';
import { makeFetchBatch, type KafkajsBatchConstructor, type KafkajsBatchInternals } from './kafka-fetch-batch.js';
import { makeRecordDecoder, type KafkajsRecordInternals } from './kafka-record-decoder.js';

const require = createRequire(import.meta.url);

/** The kafkajs release whose modules ours reproduce (tests/kafka-record-decoder.test.ts checks them against it). */
export const KAFKAJS_CHECKED_VERSION = '2.2.4';
const RECORD_DECODER = 'kafkajs/src/protocol/recordBatch/record/v0/decoder.js';
const FETCH_BATCH = 'kafkajs/src/consumer/batch.js';

/** Whose record decoding (record decoder and consumer Batch) kafkajs uses on this thread. */
export type RecordDecoderOwner = 'modewatch' | 'kafkajs';

/** Puts `exports` in Node's module cache as the module at `path`, so that kafkajs's require of it finds ours. */
function replaceModule(path: string, exports: unknown): void {
  const mod = new Module(path);
  mod.filename = path;
  mod.exports = exports;
  (mod as { loaded: boolean }).loaded = true;
  require.cache[path] = mod;
}

function installRecordDecoding(): RecordDecoderOwner {
  const version = (require('kafkajs/package.json') as { version: string }).version;
  if (version !== KAFKAJS_CHECKED_VERSION) return 'kafkajs';
  // Already loaded (kafkajs was imported before this module on this thread): too late to replace anything.
  if (require.cache[require.resolve('kafkajs')] !== undefined || require.cache[require.resolve(RECORD_DECODER)] !== undefined) return 'kafkajs';
  const Long = require('kafkajs/src/utils/long.js') as KafkajsRecordInternals['Long'] & KafkajsBatchInternals['Long'];
  replaceModule(
    require.resolve(RECORD_DECODER),
    makeRecordDecoder({
      Long,
      HeaderDecoder: require('kafkajs/src/protocol/recordBatch/header/v0/decoder.js') as KafkajsRecordInternals['HeaderDecoder'],
      logAppendTime: (require('kafkajs/src/protocol/timestampTypes.js') as { LOG_APPEND_TIME: number }).LOG_APPEND_TIME,
    }),
  );
  // The original Batch first (its methods stay), then ours in its place before kafkajs's consumer requires it.
  const original = require(FETCH_BATCH) as KafkajsBatchConstructor;
  replaceModule(
    require.resolve(FETCH_BATCH),
    makeFetchBatch(original, {
      Long,
      filterAbortedMessages: require('kafkajs/src/consumer/filterAbortedMessages.js') as KafkajsBatchInternals['filterAbortedMessages'],
    }),
  );
  return 'modewatch';
}

/** Whose record decoding kafkajs uses on this thread: logged when the daemon starts. */
export const recordDecoderOwner: RecordDecoderOwner = installRecordDecoding();

const kafkajs = require('kafkajs') as typeof Kafkajs;
export const Kafka = kafkajs.Kafka;
export type Kafka = Kafkajs.Kafka;
export const logLevel = kafkajs.logLevel;
