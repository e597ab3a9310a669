using RewriteProxy.Cache;

namespace RewriteProxy.Cli.Demo;

/// <summary>Why a call is in the workload, and so what the cache should do with it.</summary>
public enum CallKind
{
    /// <summary>A question asked for the first time: a miss.</summary>
    First,
    /// <summary>The same question again, word for word or with case, spacing or the question mark changed: an exact hit.</summary>
    Repeat,
    /// <summary>The same question in other words: a semantic hit when similarity reaches the lane's HitSimilarity.</summary>
    Paraphrase,
    /// <summary>A question one detail away from a cached one (year, amount, negation, identifier, opposite): never a hit.</summary>
    NearMiss,
}

/// <summary>One lane call of the workload.</summary>
public sealed record DemoCall(string Lane, string Question, CallKind Kind, int Item);

/// <summary>
/// The calls of a demo run, in rounds. Round 0 asks every chosen question once per lane; later rounds repeat, paraphrase and
/// nearly repeat them. Within a round no lane gets the same normalised question twice, so no two concurrent callers share
/// one upstream call: every miss's drops are then counted once on both sides of the books.
/// </summary>
public static class DemoWorkload
{
    public static readonly string[] Lanes = ["draft", "siblings"];

    /// <summary>Share of a lane's calls that are first-time questions: with 150 calls a lane, every scenario question is asked.</summary>
    public const double FirstShare = 0.16;

    /// <summary>How follow-up calls split between repeats, paraphrases and near-misses (weights; near-misses run out first).</summary>
    public const double RepeatWeight = 0.40;
    public const double ParaphraseWeight = 0.35;
    public const double NearMissWeight = 0.25;

    public static IReadOnlyList<IReadOnlyList<DemoCall>> Build(int seed, int calls)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(calls, Lanes.Length);
        var random = new Random(seed);
        var first = new List<DemoCall>();
        var followUps = new List<DemoCall>();
        for (var l = 0; l < Lanes.Length; l++)
        {
            var lane = Lanes[l];
            var laneCalls = calls / Lanes.Length + (l < calls % Lanes.Length ? 1 : 0);
            var bases = Math.Clamp((int)Math.Round(laneCalls * FirstShare), 1, Math.Min(laneCalls, DemoScenario.Questions.Length));
            var items = Enumerable.Range(0, DemoScenario.Questions.Length).OrderBy(_ => random.Next()).Take(bases).ToList();
            first.AddRange(items.Select(i => new DemoCall(lane, DemoScenario.Questions[i].Question, CallKind.First, i)));
            var nearMissesLeft = items.Where(i => DemoScenario.Questions[i].NearMiss is not null).ToHashSet();
            for (var n = bases; n < laneCalls; n++)
            {
                var item = items[random.Next(items.Count)];
                var q = DemoScenario.Questions[item];
                var roll = random.NextDouble() * (RepeatWeight + ParaphraseWeight + NearMissWeight);
                if (roll >= RepeatWeight + ParaphraseWeight && nearMissesLeft.Count > 0)
                {
                    // A near-miss is asked once: asked again it would be an exact hit on its own entry.
                    var target = nearMissesLeft.Contains(item) ? item : nearMissesLeft.ElementAt(random.Next(nearMissesLeft.Count));
                    nearMissesLeft.Remove(target);
                    followUps.Add(new DemoCall(lane, DemoScenario.Questions[target].NearMiss!.Text, CallKind.NearMiss, target));
                }
                else if (roll >= RepeatWeight)
                    followUps.Add(new DemoCall(lane, q.Paraphrases[random.Next(q.Paraphrases.Length)], CallKind.Paraphrase, item));
                else
                    followUps.Add(new DemoCall(lane, Resurface(q.Question, random), CallKind.Repeat, item));
            }
        }

        var rounds = new List<List<DemoCall>> { first };
        var keys = new List<HashSet<string>> { first.Select(Key).ToHashSet() };
        foreach (var call in followUps.OrderBy(_ => random.Next()))
        {
            var key = Key(call);
            var r = 1;
            while (r < rounds.Count && keys[r].Contains(key)) r++;
            if (r == rounds.Count)
            {
                rounds.Add([]);
                keys.Add([]);
            }
            rounds[r].Add(call);
            keys[r].Add(key);
        }
        return rounds;
    }

    static string Key(DemoCall call) => call.Lane + "\n" + QuestionText.Normalize(call.Question);

    /// <summary>The question as typed again: as before, in lower case, with doubled spaces, or without its question mark.</summary>
    static string Resurface(string question, Random random) => random.Next(4) switch
    {
        0 => question,
        1 => question.ToLowerInvariant(),
        2 => question.Replace(" ", "  ", StringComparison.Ordinal),
        _ => question.TrimEnd('?'),
    };
}
