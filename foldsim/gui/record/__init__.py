"""Recording a view: clips (MP4, GIF) and screenshots, their options, framing and caption."""
