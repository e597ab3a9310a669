namespace RewriteProxy.Lanes;

/// <summary>Why a lane call was forwarded uncached: the value of the <c>X-Rewrite-Bypass</c> header.</summary>
public enum BypassReason
{
    /// <summary>Tools or functions in the request, or tool calls and results in the conversation.</summary>
    Tools,
    /// <summary>A content part that is not text (an image, audio, a file).</summary>
    Media,
    /// <summary><c>n</c> other than 1: the client wants several answers.</summary>
    N,
    /// <summary>Log probabilities asked for: a cached answer has none.</summary>
    Logprobs,
    /// <summary>Audio output asked for.</summary>
    Audio,
    /// <summary>A predicted output given: the answer depends on it.</summary>
    Prediction,
    /// <summary>Output modalities other than text.</summary>
    Modalities,
    /// <summary>No user message with text, or the lane's QuestionPattern did not match.</summary>
    NoQuestion,
}
