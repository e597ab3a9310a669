// Runs rewrite calls the way RAG apps built on LangChain.js make them (versions pinned in package.json) and prints,
// as one JSON line (an array, one result per call), what each app saw: the list (or passage) its own parser returned, the raw text, and the proxy's
// X-Rewrite-* headers. With `direct`, the same call is also made straight to the upstream, so a test can compare the
// parser's list through the proxy with the list of a direct call.
// Input (argv[2], JSON): { proxy: { siblings, draft }, upstream, apiKey, model,
//   calls: [ { app: "multiquery" | "hyde" | "inhouse-numbered" | "inhouse-json" | "inhouse-unmarked" | "inhouse-draft"
//              | "bare-siblings" | "bare-draft", question, direct?, apiKey? } ] }
//   bare-*: the question alone as the user message (today's fixture traffic), for a baseline.
//   apiKey per call: another credential is another partition, so a test can keep calls apart; model per call (in-house
//   and bare apps) overrides spec.model.
//   proxy.siblings / proxy.draft: the lanes' base URLs (…/lane/siblings/v1); upstream: the provider's base URL (…/v1).
import { ChatOpenAI } from '@langchain/openai';
import { MultiQueryRetriever } from '@langchain/classic/retrievers/multi_query';
import { HydeRetriever } from '@langchain/classic/retrievers/hyde';
import { MemoryVectorStore } from '@langchain/classic/vectorstores/memory';
import { BaseRetriever } from '@langchain/core/retrievers';
import { FakeEmbeddings } from '@langchain/core/utils/testing';
import { HumanMessage, SystemMessage } from '@langchain/core/messages';

const spec = JSON.parse(process.argv[2]);

// What the proxy answered on the last call: its X-Rewrite-* headers and the text, read off the wire by a fetch
// wrapper (LangChain returns parsed values, not responses).
let seen = null;
async function recordingFetch(url, init) {
  const response = await fetch(url, init);
  const headers = {};
  for (const [name, value] of response.headers) if (name.startsWith('x-rewrite-')) headers[name] = value;
  const body = await response.clone().json().catch(() => null);
  seen = { status: response.status, headers, text: body?.choices?.[0]?.message?.content ?? null };
  return response;
}

function llm(baseURL, apiKey, model) {
  return new ChatOpenAI({ model: model ?? spec.model, apiKey: apiKey ?? spec.apiKey, temperature: 0, maxRetries: 0,
    configuration: { baseURL, fetch: recordingFetch } });
}

// A retriever that finds nothing and remembers what it was asked: the queries MultiQueryRetriever generated.
class RecordingRetriever extends BaseRetriever {
  lc_namespace = ['rewriteproxy', 'tests'];
  queries = [];
  async _getRelevantDocuments(query) { this.queries.push(query); return []; }
}

// In-house apps: a system message, an instruction with the question between delimiters (or in a paragraph of its
// own), and the app's own parser. Written the way an app team would, not taken from any framework.
const SYSTEM = 'You help the search service of a municipal help centre. Answer only with what is asked.';
const inHouse = {
  'inhouse-numbered': {
    prompt: q => `Write four short search queries that would find documents answering the customer's message below.\n"""\n${q}\n"""\nOne query per line, numbered, nothing else.`,
    parse: text => text.split('\n').map(l => l.trim()).filter(l => l !== '').map(l => l.replace(/^\d+[.)]\s*/, '')),
  },
  'inhouse-json': {
    prompt: q => `Rephrase the text between <<< and >>> as three different search questions.\n<<<${q}>>>\nAnswer with a JSON array of strings.`,
    parse: text => JSON.parse(text.replace(/^```(?:json)?\s*|\s*```$/g, '')),
  },
  'inhouse-unmarked': {
    prompt: q => `We run a help centre for a regional transit operator.\n\n${q}\n\nList related questions a rider might also ask, one per line.`,
    parse: text => text.split('\n').map(l => l.trim()).filter(l => l !== ''),
  },
  'bare-siblings': { prompt: q => q, parse: text => text.split('\n').map(l => l.trim()).filter(l => l !== ''), bare: true },
  'bare-draft': { prompt: q => q, parse: text => text, bare: true, draft: true },
  'inhouse-draft': {
    prompt: q => `Draft the opening paragraph of a help-centre article for the question in the tags.\n<question>${q}</question>\nPlain prose, no headings.`,
    parse: text => text,
    draft: true,
  },
};

async function run(app, question, baseURLs, apiKey, model) {
  seen = null;
  if (app === 'multiquery') {
    const retriever = new RecordingRetriever();
    const mq = MultiQueryRetriever.fromLLM({ llm: llm(baseURLs.siblings, apiKey), retriever });
    await mq.invoke(question);
    return { parsed: retriever.queries, ...seen };
  }
  if (app === 'hyde') {
    const store = new MemoryVectorStore(new FakeEmbeddings());
    const hyde = new HydeRetriever({ vectorStore: store, llm: llm(baseURLs.draft, apiKey), promptTemplate: 'websearch', k: 1 });
    await hyde.invoke(question);
    return { parsed: seen?.text ?? null, ...seen };
  }
  const shape = inHouse[app];
  const lane = shape.draft ? baseURLs.draft : baseURLs.siblings;
  const messages = shape.bare ? [new HumanMessage(question)] : [new SystemMessage(SYSTEM), new HumanMessage(shape.prompt(question))];
  const message = await llm(lane, apiKey, model).invoke(messages);
  const text = typeof message.content === 'string' ? message.content : message.content.map(p => p.text ?? '').join('');
  let parsed;
  try { parsed = shape.parse(text); } catch (e) { parsed = { parseError: String(e?.message ?? e) }; }
  return { parsed, ...seen };
}

const results = [];
const direct = { siblings: spec.upstream, draft: spec.upstream };
for (const call of spec.calls) {
  const result = { app: call.app, question: call.question };
  try {
    Object.assign(result, await run(call.app, call.question, spec.proxy, call.apiKey, call.model));
    if (call.direct) result.direct = await run(call.app, call.question, direct, call.apiKey, call.model);
  } catch (e) {
    result.error = String(e?.message ?? e);
    result.status = e?.status ?? seen?.status ?? null;
  }
  results.push(result);
}
process.stdout.write(JSON.stringify(results) + '\n');
