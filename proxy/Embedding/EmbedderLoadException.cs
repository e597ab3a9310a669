namespace RewriteProxy.Embedding;

/// <summary>
/// The embedding model or its vocabulary cannot be used. The message is one line that names the file and what is
/// wrong with it, so that the process can print it at start and exit.
/// </summary>
public sealed class EmbedderLoadException : Exception
{
    public EmbedderLoadException(string message) : base(message) { }

    public EmbedderLoadException(string message, Exception inner) : base(message, inner) { }
}
