using System.Text.Json;

namespace RewriteProxy.Store;

/// <summary>
/// An <c>entries</c> row as the stores read it back: scores as JSON text, times as Unix milliseconds (SQLite keeps
/// them so; PostgreSQL converts its timestamps in the query). Decoded once into a <see cref="StoredEntry"/>.
/// </summary>
internal sealed record EntryRow
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

    /// <summary>A damaged scores value costs the hit its drift headers, never the hit itself.</summary>
    public static EntryScores DecodeScores(string json)
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
