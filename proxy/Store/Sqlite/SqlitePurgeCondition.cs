using Dapper;

namespace RewriteProxy.Store.Sqlite;

/// <summary>
/// The one SQL condition of a <see cref="PurgeFilter"/>: purge deletes by it and purge --dry-run counts by it, so the
/// count is what a purge would delete. Only the filter's set fields become clauses (an index can serve each).
/// </summary>
internal static class SqlitePurgeCondition
{
    /// <summary>The condition on <c>entries</c> (age by <c>created</c>).</summary>
    /// <exception cref="ArgumentException">the filter is empty.</exception>
    public static (string Where, DynamicParameters Parameters) Entries(PurgeFilter filter, DateTimeOffset now) =>
        Build(filter, now, "created", withId: true);

    /// <summary>
    /// The condition on <c>templates</c> (age by <c>learned_at</c>): templates hold the app's prompt text, learned in a
    /// lane and partition, so they go with that lane's or partition's entries; null for a purge of one entry by id.
    /// </summary>
    public static (string Where, DynamicParameters Parameters)? Templates(PurgeFilter filter, DateTimeOffset now) =>
        filter.Id is null ? Build(filter, now, "learned_at", withId: false) : null;

    static (string, DynamicParameters) Build(PurgeFilter f, DateTimeOffset now, string timeColumn, bool withId)
    {
        if (f.IsEmpty) throw new ArgumentException("a purge needs at least one of lane, partition, age or id");
        var clauses = new List<string>();
        var parameters = new DynamicParameters();
        if (f.Lane is not null)
        {
            clauses.Add("lane = @purgeLane");
            parameters.Add("purgeLane", f.Lane);
        }
        if (f.PartitionHash is not null)
        {
            clauses.Add("partition_hash = @purgePartition");
            parameters.Add("purgePartition", f.PartitionHash);
        }
        if (f.OlderThan is { } age)
        {
            clauses.Add($"{timeColumn} < @purgeBefore");
            parameters.Add("purgeBefore", (now - age).ToUnixTimeMilliseconds());
        }
        if (withId && f.Id is { } id)
        {
            clauses.Add("id = @purgeId");
            parameters.Add("purgeId", id);
        }
        return (string.Join(" AND ", clauses), parameters);
    }
}
