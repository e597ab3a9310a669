using System.Runtime.InteropServices;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json;

namespace RewriteProxy.Store.Postgres;

/// <summary>How values cross into PostgreSQL and back: times, vectors, texts and the hashes that key long texts.</summary>
public static class PostgresValues
{
    /// <summary>Times are kept to the millisecond, as the SQLite store keeps them, so both stores give back equal times.</summary>
    public static DateTime Time(DateTimeOffset t) => DateTime.UnixEpoch.AddMilliseconds(t.ToUnixTimeMilliseconds());

    public static DateTimeOffset Time(DateTime utc) => new(DateTime.SpecifyKind(utc, DateTimeKind.Utc));

    /// <summary>float32 values in the machine's (little-endian) order, as the SQLite store keeps them.</summary>
    public static byte[] Vector(float[] vector) => MemoryMarshal.AsBytes(vector.AsSpan()).ToArray();

    public static float[] Vector(byte[] bytes) => MemoryMarshal.Cast<byte, float>(bytes).ToArray();

    /// <summary>
    /// PostgreSQL's text cannot hold U+0000, which JSON lets a client send; it becomes U+FFFD, the same way on writes
    /// and on lookups, so such a question is still found again.
    /// </summary>
    public static string Text(string text) => text.Contains('\0') ? text.Replace('\0', '\uFFFD') : text;

    public static string? TextOrNull(string? text) => text is null ? null : Text(text);

    /// <summary>SHA-256 of a (cleaned) text: the unique key of a normalised question within its scope.</summary>
    public static byte[] Hash(string text) => SHA256.HashData(Encoding.UTF8.GetBytes(Text(text)));

    /// <summary>The unique key of a template's prefix and suffix (a NUL between them cannot occur in cleaned text).</summary>
    public static byte[] Hash(string prefix, string suffix) => SHA256.HashData(Encoding.UTF8.GetBytes(Text(prefix) + "\0" + Text(suffix)));

    public static string Scores(EntryScores scores) => JsonSerializer.Serialize(scores);
}
