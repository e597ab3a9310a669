namespace RewriteProxy.Store;

/// <summary>Per-lane figures from the entry counts and the tallies, as every store reads them (<see cref="Tally"/> names).</summary>
public static class LaneStatsOf
{
    /// <param name="entries">Entries per lane.</param>
    /// <param name="tallies">Per lane, each tally's value by name.</param>
    public static IReadOnlyList<LaneStats> Build(IReadOnlyDictionary<string, long> entries,
        IReadOnlyDictionary<string, Dictionary<string, long>> tallies) =>
        entries.Keys.Union(tallies.Keys).Order(StringComparer.Ordinal).Select(lane =>
        {
            var t = tallies.GetValueOrDefault(lane) ?? [];
            long Get(string name) => t.GetValueOrDefault(name);
            IReadOnlyDictionary<string, long> Prefixed(string prefix) => t.Where(p => p.Key.StartsWith(prefix, StringComparison.Ordinal))
                .ToDictionary(p => p.Key[prefix.Length..], p => p.Value);
            return new LaneStats(lane, entries.GetValueOrDefault(lane), Get(Tally.Lookup("hit_exact")), Get(Tally.Lookup("hit_semantic")),
                Get(Tally.Lookup("miss")), Get(Tally.Lookup("bypass")), Get(Tally.TokensSaved), Prefixed(Tally.Dropped("")),
                Prefixed(Tally.Refused("")), Prefixed(Tally.Question("")));
        }).ToList();
}
