using System.Text.Json;
using RewriteProxy.Cache;
using RewriteProxy.Embedding;
using RewriteProxy.Store;

namespace RewriteProxy.Cli;

public enum TuneSource
{
    /// <summary>The store's event log: drift per verdict, guard refusals.</summary>
    Events,
    /// <summary>A JSONL of question/rewrite pairs labelled good or bad.</summary>
    DriftLabels,
    /// <summary>A JSONL of question pairs labelled same or differ.</summary>
    PairLabels,
}

/// <summary>What <c>tune</c> measured its thresholds on.</summary>
public sealed record TuneData(TuneSource Source, string Origin, IReadOnlyList<DriftSample> Drifts, IReadOnlyList<PairSample> Pairs,
    IReadOnlyDictionary<string, int> GuardRefusals, DateTimeOffset? First, DateTimeOffset? Last);

/// <summary>One line of a labels file before embedding.</summary>
public sealed record LabelLine(int Line, string First, string Second, string Label);

/// <summary>A labels file that cannot be used; the message names the file and line.</summary>
public sealed class TuneInputException(string message) : Exception(message);

public static class TuneInput
{
    /// <summary>Texts per embedder call: large enough to amortise a model run, small enough for a progress bar that moves.</summary>
    public const int EmbedBatch = 32;

    /// <summary>
    /// Rewrites and guard refusals of one lane from the store's event log. Only the scored columns are read (not the
    /// question and candidate texts), so a full log of a million events fits in a few tens of megabytes.
    /// </summary>
    public static async Task<TuneData> ReadEventsAsync(IRewriteStore store, string lane, DateTimeOffset since, CancellationToken cancel)
    {
        var drifts = new List<DriftSample>();
        var refusals = new Dictionary<string, int>();
        DateTimeOffset? first = null, last = null;
        await foreach (var e in store.ScoredEventsAsync(lane, since, cancel))
        {
            first ??= e.At;
            last = e.At;
            if (e.Kind == "rewrite") drifts.Add(new DriftSample(string.Intern(e.Verdict), e.Score));
            else
            {
                var reason = e.Reason ?? "";
                refusals[reason] = refusals.GetValueOrDefault(reason) + 1;
            }
        }
        return new TuneData(TuneSource.Events, $"event log of {store.Location}", drifts, [], refusals, first, last);
    }

    /// <summary>
    /// Reads a labels file: every non-blank line is either <c>{"question","rewrite","label":"good"|"bad"}</c> or
    /// <c>{"question","other","label":"same"|"differ"}</c>, one kind per file.
    /// </summary>
    /// <exception cref="TuneInputException">a line is not JSON, lacks a field, has another label, or is of the other kind.</exception>
    public static (TuneSource Kind, IReadOnlyList<LabelLine> Lines) ParseLabels(string path)
    {
        if (!File.Exists(path)) throw new TuneInputException($"{path}: the labels file does not exist");
        TuneSource? kind = null;
        var lines = new List<LabelLine>();
        var number = 0;
        foreach (var text in File.ReadLines(path))
        {
            number++;
            if (string.IsNullOrWhiteSpace(text)) continue;
            string Fail(string why) => throw new TuneInputException($"{path}, line {number}: {why}");
            JsonElement root;
            try
            {
                using var doc = JsonDocument.Parse(text);
                root = doc.RootElement.Clone();
            }
            catch (JsonException e)
            {
                Fail($"not valid JSON ({e.Message.Split(" Path:")[0].TrimEnd('.')})");
                continue;
            }
            if (root.ValueKind != JsonValueKind.Object) Fail("expected a JSON object");
            string? Text(string name) =>
                root.TryGetProperty(name, out var v) && v.ValueKind == JsonValueKind.String ? v.GetString() : null;
            var question = Text("question") ?? Fail("\"question\" (a string) is missing");
            var rewrite = Text("rewrite");
            var other = Text("other");
            var label = Text("label") ?? Fail("\"label\" (a string) is missing");
            TuneSource lineKind;
            if (rewrite is not null && other is null)
            {
                lineKind = TuneSource.DriftLabels;
                if (label is not (TuneSweep.Good or TuneSweep.Bad)) Fail($"label '{label}' of a rewrite must be \"good\" or \"bad\"");
            }
            else if (other is not null && rewrite is null)
            {
                lineKind = TuneSource.PairLabels;
                if (label is not ("same" or "differ")) Fail($"label '{label}' of a question pair must be \"same\" or \"differ\"");
            }
            else
            {
                Fail("give either \"rewrite\" (drift labels) or \"other\" (question pairs), not both or neither");
                continue;
            }
            if (kind is not null && kind != lineKind)
                Fail($"this line is a {Describe(lineKind)} but the file began with {Describe(kind.Value)}s; use one kind per file");
            kind = lineKind;
            lines.Add(new LabelLine(number, question, rewrite ?? other!, label));
        }
        if (kind is null) throw new TuneInputException($"{path}: no labelled lines");
        return (kind.Value, lines);
    }

    static string Describe(TuneSource kind) => kind == TuneSource.DriftLabels ? "rewrite label" : "question pair";

    /// <summary>Embeds both sides of every line in batches and scores them; <paramref name="progress"/> gets lines done.</summary>
    public static TuneData Score(string path, TuneSource kind, IReadOnlyList<LabelLine> lines, IEmbedder embedder,
        Action<int>? progress = null, CancellationToken cancel = default)
    {
        var drifts = new List<DriftSample>();
        var pairs = new List<PairSample>();
        var guard = kind == TuneSource.PairLabels ? new AnchorGuard() : null;
        for (var start = 0; start < lines.Count; start += EmbedBatch / 2)
        {
            cancel.ThrowIfCancellationRequested();
            var batch = lines.Skip(start).Take(EmbedBatch / 2).ToList();
            var vectors = embedder.Embed(batch.SelectMany(l => new[] { l.First, l.Second }).ToList());
            for (var i = 0; i < batch.Count; i++)
            {
                var similarity = VectorMath.Cosine(vectors[2 * i], vectors[2 * i + 1]);
                if (guard is null) drifts.Add(new DriftSample(batch[i].Label, 1 - similarity));
                else pairs.Add(new PairSample(batch[i].Label == "same", similarity, guard.Compare(batch[i].First, batch[i].Second).Agree));
            }
            progress?.Invoke(start + batch.Count);
        }
        return new TuneData(kind, $"labels file {path}", drifts, pairs, new Dictionary<string, int>(), null, null);
    }
}
