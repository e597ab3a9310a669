// Runs lane calls through the official `@anthropic-ai/sdk` npm client (version pinned in package.json) and prints,
// as one JSON line, the parsed text, the status and the proxy's X-Rewrite-* headers of each call.
// Input (argv[2], JSON): { baseURL, apiKey, calls: [ { stream, model, question, system?, maxTokens?, headers? } ] }
import Anthropic from '@anthropic-ai/sdk';

const spec = JSON.parse(process.argv[2]);
const client = new Anthropic({ baseURL: spec.baseURL, apiKey: spec.apiKey, maxRetries: 0 });

function proxyHeaders(response) {
  const seen = {};
  for (const [name, value] of response.headers) if (name.startsWith('x-rewrite-')) seen[name] = value;
  return seen;
}

async function call(c) {
  const request = { model: c.model, max_tokens: c.maxTokens ?? 512, messages: [{ role: 'user', content: c.question }] };
  if (c.system) request.system = c.system;
  const headers = c.headers ?? {};
  if (!c.stream) {
    const { data, response } = await client.messages.create(request, { headers }).withResponse();
    return { status: response.status, headers: proxyHeaders(response), text: data.content.map(b => b.text ?? '').join(''), id: data.id, usage: data.usage };
  }
  // messages.stream() is the SDK's helper that accumulates the events into the final message.
  const stream = client.messages.stream(request, { headers });
  const types = [];
  let text = '';
  stream.on('streamEvent', event => types.push(event.type));
  stream.on('text', delta => { text += delta; });
  const final = await stream.finalMessage();
  const response = (await stream.withResponse()).response;
  return { status: response.status, headers: proxyHeaders(response), text, types, finalText: final.content.map(b => b.text ?? '').join(''), usage: final.usage };
}

const results = [];
for (const c of spec.calls) {
  try {
    results.push(await call(c));
  } catch (e) {
    results.push({ error: String(e?.message ?? e), status: e?.status ?? null });
  }
}
process.stdout.write(JSON.stringify(results) + '\n');
