/**
 * The one place modewatch loads kafkajs. Before kafkajs's modules load, its per-record decoder
 * (src/protocol/recordBatch/record/v0/decoder.js) is replaced in Node's module cache by ours
 * (kafka-record-decoder.ts), which returns the same records for a third less CPU. Only for the kafkajs version it
 * was checked against (kafkajs is no longer maintained, so its internals stay as they are); with another version,
 * or when kafkajs was already loaded on this thread, kafkajs keeps its own decoder and works as before.
 *
 * Each thread has its own module cache: this runs on whichever thread imports this module first.
 */
import { createRequire, Module } from 'node:module';
import type * as Kafkajs from 'kafkajs';
import { makeRecordDecoder, type KafkajsRecordInternals } from './kafka-record-decoder.js';

const require = createRequire(import.meta.url);

/** The kafkajs release whose record decoder ours reproduces (tests/kafka-record-decoder.test.ts checks it). */
export const KAFKAJS_CHECKED_VERSION = '2.2.4';
const RECORD_DECODER = 'kafkajs/src/protocol/recordBatch/record/v0/decoder.js';

/** Whose record decoder kafkajs uses on this thread. */
export type RecordDecoderOwner = 'modewatch' | 'kafkajs';

function installRecordDecoder(): RecordDecoderOwner {
  const version = (require('kafkajs/package.json') as { version: string }).version;
  if (version !== KAFKAJS_CHECKED_VERSION) return 'kafkajs';
  const path = require.resolve(RECORD_DECODER);
  // Already loaded (kafkajs was imported before this module on this thread): too late to replace it.
  if (require.cache[path] !== undefined) return 'kafkajs';
  const internals: KafkajsRecordInternals = {
    Long: require('kafkajs/src/utils/long.js') as KafkajsRecordInternals['Long'],
    HeaderDecoder: require('kafkajs/src/protocol/recordBatch/header/v0/decoder.js') as KafkajsRecordInternals['HeaderDecoder'],
    logAppendTime: (require('kafkajs/src/protocol/timestampTypes.js') as { LOG_APPEND_TIME: number }).LOG_APPEND_TIME,
  };
  const mod = new Module(path);
  mod.filename = path;
  mod.exports = makeRecordDecoder(internals);
  (mod as { loaded: boolean }).loaded = true;
  require.cache[path] = mod;
  return 'modewatch';
}

/** Whose record decoder kafkajs uses on this thread: logged when the daemon starts. */
export const recordDecoderOwner: RecordDecoderOwner = installRecordDecoder();

const kafkajs = require('kafkajs') as typeof Kafkajs;
export const Kafka = kafkajs.Kafka;
export type Kafka = Kafkajs.Kafka;
export const logLevel = kafkajs.logLevel;
