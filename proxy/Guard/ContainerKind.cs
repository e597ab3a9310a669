namespace RewriteProxy.Guard;

/// <summary>The kinds of container a model wraps its sibling lines in: the word shown in events and tests.</summary>
public static class ContainerKind
{
    /// <summary>No container: lines (with or without a preamble, mixed markers). Answered as before, one per line.</summary>
    public const string Plain = "plain";
    /// <summary>An XML-style tag pair around the lines (<c>&lt;questions&gt;…&lt;/questions&gt;</c>).</summary>
    public const string Tags = "tags";
    /// <summary>Every candidate line numbered the same way (<c>1.</c> or <c>1)</c>).</summary>
    public const string Numbered = "numbered";
    /// <summary>Every candidate line carries the same bullet.</summary>
    public const string Bulleted = "bulleted";
    /// <summary>Plain lines inside a code fence.</summary>
    public const string Fence = "fence";
    /// <summary>A JSON array of strings, or an object holding one.</summary>
    public const string Json = "json";
}
