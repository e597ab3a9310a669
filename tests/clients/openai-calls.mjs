// Runs lane calls through the official `openai` npm client (version pinned in package.json) and prints, as one JSON
// line, what the app would see: the parsed text (or the SDK error), the status and the proxy's X-Rewrite-* headers of each call.
// Input (argv[2], JSON): { client: "openai" | "azure", baseURL | endpoint, apiKey, deployment?, apiVersion?, maxRetries? (0), calls: [
//   { api: "chat" | "responses", stream, model, question, system?, lane?, headers? } ] }
import OpenAI, { AzureOpenAI } from 'openai';

const spec = JSON.parse(process.argv[2]);
// Requests the client sent for the current call, retries included.
let attempts = 0;
const countingFetch = (...args) => {
  attempts++;
  return fetch(...args);
};
const common = { apiKey: spec.apiKey, maxRetries: spec.maxRetries ?? 0, fetch: countingFetch };
const client = spec.client === 'azure'
  ? new AzureOpenAI({ ...common, endpoint: spec.endpoint, apiVersion: spec.apiVersion, deployment: spec.deployment })
  : new OpenAI({ ...common, baseURL: spec.baseURL });

function proxyHeaders(response) {
  const seen = {};
  for (const [name, value] of response.headers) if (name.startsWith('x-rewrite-')) seen[name] = value;
  return seen;
}

async function chat(call) {
  const messages = [];
  if (call.system) messages.push({ role: 'system', content: call.system });
  messages.push({ role: 'user', content: call.question });
  const request = { model: call.model, messages, temperature: 0 };
  const headers = call.headers ?? {};
  if (!call.stream) {
    const { data, response } = await client.chat.completions.create(request, { headers }).withResponse();
    return { status: response.status, headers: proxyHeaders(response), text: data.choices[0].message.content, id: data.id };
  }
  const { data: stream, response } = await client.chat.completions.create({ ...request, stream: true }, { headers }).withResponse();
  let text = '';
  let chunks = 0;
  for await (const chunk of stream) {
    chunks++;
    text += chunk.choices[0]?.delta?.content ?? '';
  }
  return { status: response.status, headers: proxyHeaders(response), text, chunks };
}

async function responses(call) {
  const request = { model: call.model, input: call.question, temperature: 0 };
  if (call.system) request.instructions = call.system;
  const headers = call.headers ?? {};
  if (!call.stream) {
    const { data, response } = await client.responses.create(request, { headers }).withResponse();
    return { status: response.status, headers: proxyHeaders(response), text: data.output_text, id: data.id, usage: data.usage };
  }
  const { data: stream, response } = await client.responses.create({ ...request, stream: true }, { headers }).withResponse();
  let text = '';
  const types = [];
  let completed = null;
  for await (const event of stream) {
    types.push(event.type);
    if (event.type === 'response.output_text.delta') text += event.delta;
    if (event.type === 'response.completed') completed = event.response;
  }
  return { status: response.status, headers: proxyHeaders(response), text, types, completedText: completed?.output?.[0]?.content?.[0]?.text ?? null };
}

const results = [];
for (const call of spec.calls) {
  attempts = 0;
  try {
    results.push({ ...(call.api === 'responses' ? await responses(call) : await chat(call)), attempts });
  } catch (e) {
    // What an app can read of a failed call: the SDK's error class and the fields it parsed from our error body.
    results.push({
      error: String(e?.message ?? e), status: e?.status ?? null, apiError: e instanceof OpenAI.APIError,
      errorClass: e?.constructor?.name ?? null, code: e?.code ?? null, type: e?.type ?? null,
      headers: e?.headers ? proxyHeaders({ headers: e.headers }) : null, attempts,
    });
  }
}
process.stdout.write(JSON.stringify(results) + '\n');
