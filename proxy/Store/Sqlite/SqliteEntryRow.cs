using System.Text.Json;

namespace RewriteProxy.Store.Sqlite;

/// <summary>An <c>entries</c> row as SQLite holds it: scores as JSON text, times as Unix milliseconds.</summary>
internal sealed record SqliteEntryRow
{
    public long Id { get; init; }
    public string ScopeKey { get; init; } = "";
    public string PartitionHash { get; init; } = "";
    public string Lane { get; init; } = "";
    public string Question { get; init; } = "";
    public string Normalized { get; init; } = "";
    public string Content { get; init; } = "";
    public string Scores { get; init; } = "{}";
    public string? ResponseModel { get; init; }
    public string? ModelId { get; init; }
    public long PromptTokens { get; init; }
    public long CompletionTokens { get; init; }
    public long Created { get; init; }
    public long LastHit { get; init; }
    public long HitCount { get; init; }

    public StoredEntry Decode() => new(Id, ScopeKey, PartitionHash, Lane, Question, Normalized, Content, DecodeScores(Scores),
        ResponseModel, ModelId, PromptTokens, CompletionTokens, DateTimeOffset.FromUnixTimeMilliseconds(Created),
        DateTimeOffset.FromUnixTimeMilliseconds(LastHit), HitCount);

    // A damaged scores value costs the hit its drift headers, never the hit itself.
    static EntryScores DecodeScores(string json)
    {
        try
        {
            return JsonSerializer.Deserialize<EntryScores>(json) ?? EntryScores.None;
        }
        catch (JsonException)
        {
            return EntryScores.None;
        }
    }
}
