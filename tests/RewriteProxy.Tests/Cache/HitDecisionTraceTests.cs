using RewriteProxy.Cache;
using Xunit.Abstractions;

namespace RewriteProxy.Tests.Cache;

/// <summary>Writes how the decision explained each changed word of the pairs named in HIT_TRACE (texts separated by '|'): a tool for reading dev pairs.</summary>
public sealed class HitDecisionTraceTests(ITestOutputHelper output)
{
    [Fact]
    public void Trace_named_pairs()
    {
        if (Environment.GetEnvironmentVariable("HIT_TRACE") is not { Length: > 0 } spec) return;
        var parts = spec.Split('|');
        var guard = new AnchorGuard();
        for (var i = 0; i + 1 < parts.Length; i += 2)
        {
            var trace = new List<string>();
            var a = QuestionWords.Read(parts[i], WordSenses.Default);
            var b = QuestionWords.Read(parts[i + 1], WordSenses.Default);
            var diff = QuestionDiff.Compare(a, b, WordSenses.Default, trace);
            output.WriteLine($"{parts[i]} || {parts[i + 1]}");
            output.WriteLine($"  words a: {string.Join(" ", a.Words.Select((w, k) => $"{w}[{string.Join(",", a.Lemmas[k])}:{a.Classes[k]}]"))}");
            output.WriteLine($"  {diff}");
            foreach (var t in trace) output.WriteLine("  " + t);
            var decision = new HitDecision(guard);
            var (qa, qb) = (decision.Read(parts[i]), decision.Read(parts[i + 1]));
            output.WriteLine($"  frames a: [{string.Join(", ", qa.Frames.TimeFrames)}] [{string.Join(" ", qa.Frames.Comparators)}] {qa.Frames.ImplicitNegations}; "
                + $"b: [{string.Join(", ", qb.Frames.TimeFrames)}] [{string.Join(" ", qb.Frames.Comparators)}] {qb.Frames.ImplicitNegations}");
            output.WriteLine($"  at similarity 0.9: {decision.Decide(qa, qb, 0.9)}");
        }
    }
}
