using System.Collections.Frozen;

namespace RewriteProxy.Cache;

/// <summary>
/// Anchors that the anchor guard does not read and that must agree for a hit, whatever the learned combiner says:
/// time frames ("monthly" / "annually", "this quarter" / "last quarter", "per day" / "per meal", "weekday mornings" /
/// "weekday evenings"), comparators around a number ("over 25" / "under 25", "within 12 months" / "after 12 months")
/// and implicit negations ("unless" / "if", "fails to pass" / "passes", "missing" / "attached"). Read once per question.
/// The word lists are common English (common practice), not read off the hit corpus.
/// </summary>
public sealed class QuestionFrames
{
    QuestionFrames(string[] timeFrames, string[] comparators, int implicitNegations)
    {
        TimeFrames = timeFrames;
        Comparators = comparators;
        ImplicitNegations = implicitNegations;
    }

    /// <summary>Time frames and distributives, canonical and sorted: "monthly" and "per month" are "month", "last year" is "last year", "per meal" is "per meal".</summary>
    public IReadOnlyList<string> TimeFrames { get; }

    /// <summary>The direction of every comparator bound to a number, sorted: "over 25", "more than 3", "at least 2" are "&gt;"; "under 25", "within 12 months" are "&lt;".</summary>
    public IReadOnlyList<string> Comparators { get; }

    /// <summary>Words that negate without "not": unless, lacks, missing, absent, excluding, "fails to", "other than", "apart from".</summary>
    public int ImplicitNegations { get; }

    static readonly FrozenDictionary<string, string> Frequencies = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["hourly"] = "hour", ["daily"] = "day", ["nightly"] = "night", ["weekly"] = "week", ["fortnightly"] = "fortnight",
        ["monthly"] = "month", ["quarterly"] = "quarter", ["yearly"] = "year", ["annual"] = "year", ["annually"] = "year",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    static readonly FrozenDictionary<string, string> Periods = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["hour"] = "hour", ["hours"] = "hour", ["day"] = "day", ["days"] = "day", ["night"] = "night", ["nights"] = "night",
        ["week"] = "week", ["weeks"] = "week", ["fortnight"] = "fortnight", ["month"] = "month", ["months"] = "month",
        ["quarter"] = "quarter", ["quarters"] = "quarter", ["year"] = "year", ["years"] = "year", ["annum"] = "year",
        ["semester"] = "semester", ["term"] = "term", ["season"] = "season", ["weekend"] = "weekend", ["weekday"] = "weekday",
        ["morning"] = "morning", ["afternoon"] = "afternoon", ["evening"] = "evening",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>Names of a time that stand alone: parts of the day, days of the week, seasons.</summary>
    static readonly FrozenDictionary<string, string> Times = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["morning"] = "morning", ["mornings"] = "morning", ["afternoon"] = "afternoon", ["afternoons"] = "afternoon",
        ["evening"] = "evening", ["evenings"] = "evening", ["overnight"] = "night", ["weekday"] = "weekday", ["weekdays"] = "weekday",
        ["weekend"] = "weekend", ["weekends"] = "weekend", ["monday"] = "monday", ["tuesday"] = "tuesday", ["wednesday"] = "wednesday",
        ["thursday"] = "thursday", ["friday"] = "friday", ["saturday"] = "saturday", ["sunday"] = "sunday",
        ["mondays"] = "monday", ["tuesdays"] = "tuesday", ["wednesdays"] = "wednesday", ["thursdays"] = "thursday",
        ["fridays"] = "friday", ["saturdays"] = "saturday", ["sundays"] = "sunday", ["spring"] = "spring", ["summer"] = "summer",
        ["autumn"] = "autumn", ["winter"] = "winter", ["today"] = "this day", ["tonight"] = "this night", ["tomorrow"] = "next day",
        ["yesterday"] = "last day",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>Months, read only after a deictic ("this April" / "last April"): alone they are names, which the anchor guard compares.</summary>
    static readonly FrozenSet<string> Months = FrozenSet.ToFrozenSet(
    [
        "january", "february", "march", "april", "may", "june", "july", "august", "september", "october", "november", "december",
    ], StringComparer.Ordinal);

    static readonly FrozenDictionary<string, string> Deictics = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["this"] = "this", ["current"] = "this", ["last"] = "last", ["previous"] = "last", ["past"] = "last", ["next"] = "next",
        ["coming"] = "next", ["following"] = "next",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    static readonly FrozenSet<string> Distributives = FrozenSet.ToFrozenSet(["per", "each", "every"], StringComparer.Ordinal);

    /// <summary>Comparative words that take "than", and their direction.</summary>
    static readonly FrozenDictionary<string, string> Comparatives = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["more"] = ">", ["greater"] = ">", ["higher"] = ">", ["larger"] = ">", ["bigger"] = ">", ["longer"] = ">", ["older"] = ">",
        ["later"] = ">", ["heavier"] = ">", ["less"] = "<", ["fewer"] = "<", ["lower"] = "<", ["smaller"] = "<", ["shorter"] = "<",
        ["younger"] = "<", ["earlier"] = "<", ["lighter"] = "<", ["cheaper"] = "<",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>Prepositions that bound a number, and their direction: "over 25", "before the 5th", "within 12 months".</summary>
    static readonly FrozenDictionary<string, string> Bounds = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["over"] = ">", ["above"] = ">", ["exceeding"] = ">", ["exceeds"] = ">", ["beyond"] = ">", ["after"] = ">", ["from"] = ">",
        ["since"] = ">", ["under"] = "<", ["below"] = "<", ["before"] = "<", ["within"] = "<", ["until"] = "<", ["till"] = "<",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    static readonly FrozenSet<string> Negators = FrozenSet.ToFrozenSet(
        ["unless", "lack", "lacks", "lacking", "lacked", "missing", "absent", "excluding"], StringComparer.Ordinal);

    static readonly FrozenSet<string> Failing = FrozenSet.ToFrozenSet(["fail", "fails", "failed", "failing"], StringComparer.Ordinal);

    internal static QuestionFrames Read(QuestionWords q)
    {
        var w = q.Words;
        var frames = new List<string>();
        var comparators = new List<string>();
        var negations = 0;
        for (var i = 0; i < w.Length; i++)
        {
            var word = w[i];
            var next = i + 1 < w.Length ? w[i + 1] : "";
            if (Frequencies.TryGetValue(word, out var frequency)) frames.Add(frequency);
            else if (Deictics.TryGetValue(word, out var deictic)
                     && (Periods.TryGetValue(next, out var period) || Times.TryGetValue(next, out period) || Months.TryGetValue(next, out period)))
            {
                frames.Add(deictic + " " + period);
                i++;
            }
            else if (Distributives.Contains(word) && next.Length > 0 && (Periods.ContainsKey(next) || q.Classes[i + 1] == WordClass.Content))
            {
                // "per day" / "per meal" differ; "each trip" / "every journey" do not: only periods are named.
                frames.Add(Periods.TryGetValue(next, out var per) ? "per " + per : "per *");
                i++;
            }
            else if (Times.TryGetValue(word, out var time)) frames.Add(time);

            if (Comparatives.TryGetValue(word, out var direction) && next == "than")
                comparators.Add(Flipped(w, i, direction));
            else if (word == "at" && next is "least" or "most" && Bound(q, i + 2)) comparators.Add(next == "least" ? ">" : "<");
            else if (word == "up" && next == "to" && Bound(q, i + 2)) comparators.Add("<");
            else if (Bounds.TryGetValue(word, out var bound) && Bound(q, i + 1)) comparators.Add(Flipped(w, i, bound));

            if (Negators.Contains(word) || (Failing.Contains(word) && next == "to")) negations++;
            else if ((word == "other" && next == "than") || (word is "apart" or "aside" && next == "from")) negations++;
        }
        frames.Sort(StringComparer.Ordinal);
        comparators.Sort(StringComparer.Ordinal);
        return new QuestionFrames([.. frames], [.. comparators], negations);
    }

    /// <summary>"no more than", "not later than": a negation before the comparator turns its direction.</summary>
    static string Flipped(string[] w, int at, string direction) =>
        at > 0 && w[at - 1] is "no" or "not" ? (direction == ">" ? "<" : ">") : direction;

    /// <summary>A number (or "the 5th", "midnight") at <paramref name="at"/>: what a comparator bounds.</summary>
    static bool Bound(QuestionWords q, int at)
    {
        if (at < q.Count && q.Words[at] == "the") at++;
        return at < q.Count && (q.Classes[at] == WordClass.Number || q.Words[at] is "midnight" or "midday" or "noon");
    }

    /// <summary>Why the frames of two questions disagree, or null. Time frames and comparators are compared only when both questions have some.</summary>
    internal static AnchorVerdict? Compare(QuestionFrames asked, QuestionFrames cached)
    {
        if (asked.ImplicitNegations != cached.ImplicitNegations)
            return AnchorVerdict.Refused(AnchorReason.Negation, $"implicit negations: asked {asked.ImplicitNegations}, cached {cached.ImplicitNegations}");
        if (asked.TimeFrames.Count > 0 && cached.TimeFrames.Count > 0 && !asked.TimeFrames.SequenceEqual(cached.TimeFrames))
            return AnchorVerdict.Refused(AnchorReason.TimeFrame,
                $"time frames: asked [{string.Join(", ", asked.TimeFrames)}], cached [{string.Join(", ", cached.TimeFrames)}]");
        if (asked.Comparators.Count > 0 && cached.Comparators.Count > 0 && !asked.Comparators.SequenceEqual(cached.Comparators))
            return AnchorVerdict.Refused(AnchorReason.Comparator,
                $"comparators: asked [{string.Join(" ", asked.Comparators)}], cached [{string.Join(" ", cached.Comparators)}]");
        return null;
    }
}
