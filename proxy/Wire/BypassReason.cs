namespace RewriteProxy.Wire;

/// <summary>
/// Why a lane call is forwarded uncached: the closed list of <c>X-Rewrite-Bypass</c> values and of the bypass
/// metric's <c>reason</c> label.
/// </summary>
public static class BypassReason
{
    /// <summary>Tools, functions or tool results: the answer depends on more than text.</summary>
    public const string Tools = "tools";
    /// <summary>Images, files or audio in the conversation.</summary>
    public const string Media = "media";
    /// <summary>Responses API: the answer continues a response the provider stored.</summary>
    public const string PreviousResponse = "previous_response";
    /// <summary>Responses API: the conversation lives at the provider.</summary>
    public const string Conversation = "conversation";
    /// <summary>Responses API: a background response is polled, not answered.</summary>
    public const string Background = "background";
    /// <summary>Responses API: the prompt is a template stored at the provider.</summary>
    public const string StoredPrompt = "stored_prompt";
    /// <summary>Responses API: extra output was asked for (<c>include</c>).</summary>
    public const string Include = "include";
    /// <summary>Chat completions: a predicted output was sent.</summary>
    public const string Prediction = "prediction";
    /// <summary>Chat completions: more than one choice (<c>n</c> other than 1).</summary>
    public const string Choices = "n";
    /// <summary>No user message with text to take the question from.</summary>
    public const string NoQuestion = "no_question";
    /// <summary>Token log-probabilities were asked for.</summary>
    public const string Logprobs = "logprobs";
    /// <summary>Anthropic Messages: extended thinking blocks were asked for or sent.</summary>
    public const string Thinking = "thinking";
    /// <summary>An input item of a kind the proxy does not read.</summary>
    public const string UnsupportedInput = "unsupported_input";
}
