/**
 * The constructor of kafkajs 2.2.4's consumer Batch (src/consumer/batch.js), which keeps the messages of one
 * partition's fetch that are at or after the fetched offset, then drops aborted and control records. kafkajs
 * compares each message's offset with a 64-bit Long parsed from its text, which was about an eighth of a bare
 * consumer's CPU. Here the comparison is of doubles while the offsets are safe integers (below 2^53, as Kafka
 * offsets are), else kafkajs's Long comparison, unchanged. Same fields, same order; the methods are kafkajs's own
 * (the prototype is the original's).
 *
 * A message offset is always canonical decimal text here (kafkajs's record decoders and ours print it from an
 * integer), so its double is exact whenever it is a safe integer.
 */

/** The part of a kafkajs message the batch reads. */
export interface KafkajsFetchedMessage {
  offset: string;
  isControlRecord?: boolean;
}

/** One partition of a fetch response, as kafkajs decodes it. */
export interface KafkajsPartitionData<M extends KafkajsFetchedMessage = KafkajsFetchedMessage> {
  partition: number;
  highWatermark: string;
  abortedTransactions?: unknown[];
  messages: M[];
}

export type KafkajsBatchConstructor = new (topic: string, fetchedOffset: string, partitionData: KafkajsPartitionData) => object;

/** The kafkajs modules the batch builds on. */
export interface KafkajsBatchInternals {
  Long: { fromValue(v: string): { gte(other: unknown): boolean } };
  filterAbortedMessages: (a: { messages: KafkajsFetchedMessage[]; abortedTransactions?: unknown[] }) => KafkajsFetchedMessage[];
}

interface BatchFields {
  fetchedOffset: string;
  topic: string;
  partition: number;
  highWatermark: string;
  rawMessages: KafkajsFetchedMessage[];
  messagesWithinOffset: KafkajsFetchedMessage[];
  messages: KafkajsFetchedMessage[];
}

export function makeFetchBatch(original: KafkajsBatchConstructor, k: KafkajsBatchInternals): KafkajsBatchConstructor {
  function Batch(this: BatchFields, topic: string, fetchedOffset: string, partitionData: KafkajsPartitionData): void {
    this.fetchedOffset = fetchedOffset;
    const from = Number(fetchedOffset);
    const { abortedTransactions, messages } = partitionData;
    this.topic = topic;
    this.partition = partitionData.partition;
    this.highWatermark = partitionData.highWatermark;
    this.rawMessages = messages;
    // Fetches can return messages before the offset asked for (a compressed batch is returned whole).
    let within: KafkajsFetchedMessage[];
    if (Number.isSafeInteger(from) && String(from) === fetchedOffset) {
      within = messages.filter((m) => {
        const o = Number(m.offset);
        return Number.isSafeInteger(o) ? o >= from : k.Long.fromValue(m.offset).gte(k.Long.fromValue(fetchedOffset));
      });
    } else {
      const floor = k.Long.fromValue(fetchedOffset);
      within = messages.filter((m) => k.Long.fromValue(m.offset).gte(floor));
    }
    this.messagesWithinOffset = within;
    this.messages = k.filterAbortedMessages({ messages: within, abortedTransactions }).filter((m) => !m.isControlRecord);
  }
  // kafkajs's methods (firstOffset, lastOffset, offsetLag, ...) on the fields above.
  Batch.prototype = original.prototype;
  return Batch as unknown as KafkajsBatchConstructor;
}
