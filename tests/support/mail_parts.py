"""Split one raw message (path in argv[1]) with Python's email parser: write every attachment,
decoded, into the directory argv[2] under its filename, and the text/plain body as body.txt.
Print one line per part: content type, disposition, filename."""

import email
import email.policy
import os
import sys

with open(sys.argv[1], "rb") as f:
    msg = email.message_from_binary_file(f, policy=email.policy.default)
out = sys.argv[2]
os.makedirs(out, exist_ok=True)
print("top", msg.get_content_type(), "", "")
for part in msg.walk():
    if part.is_multipart():
        continue
    name = part.get_filename() or ""
    disp = part.get_content_disposition() or ""
    print("part", part.get_content_type(), disp, name)
    data = part.get_payload(decode=True)
    if disp == "attachment" and name:
        with open(os.path.join(out, os.path.basename(name)), "wb") as f:
            f.write(data)
    elif part.get_content_type() == "text/plain":
        with open(os.path.join(out, "body.txt"), "wb") as f:
            f.write(data)
