// Runs lane calls through the official `openai` npm client (version pinned in package.json) and prints, as one JSON
// line, what the app would see: the parsed text, the status and the proxy's X-Rewrite-* headers of each call.
// Input (argv[2], JSON): { client: "openai" | "azure", baseURL | endpoint, apiKey, deployment?, apiVersion?, calls: [
//   { api: "chat" | "responses", stream, model, question, system?, lane?, headers? } ] }
import OpenAI, { AzureOpenAI } from 'openai';

const spec = JSON.parse(process.argv[2]);
const client = spec.client === 'azure'
  ? new AzureOpenAI({ endpoint: spec.endpoint, apiKey: spec.apiKey, apiVersion: spec.apiVersion, deployment: spec.deployment, maxRetries: 0 })
  : new OpenAI({ baseURL: spec.baseURL, apiKey: spec.apiKey, maxRetries: 0 });

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
  try {
    results.push(call.api === 'responses' ? await responses(call) : await chat(call));
  } catch (e) {
    results.push({ error: String(e?.message ?? e), status: e?.status ?? null });
  }
}
process.stdout.write(JSON.stringify(results) + '\n');
