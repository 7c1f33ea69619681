"""Review with a colleague: packets out and back, the three-way merge, settling, comparing.

- :mod:`app.review.packet` -- the packet format, :func:`~app.review.packet.export_packet`,
  :func:`~app.review.packet.read_packet` (every check of :mod:`app.review.safezip`).
- :mod:`app.review.review` -- the reviewer's side: :func:`~app.review.review.open_packet`,
  :func:`~app.review.review.set_decision`, :func:`~app.review.review.return_packet`.
- :mod:`app.review.merge` -- :func:`~app.review.merge.merge_packet`, three ways per joint.
- :mod:`app.review.settle` -- differences of a disputed frame and the edits that settle it.
- :mod:`app.review.compare` -- two label sets over the same images, by OKS.
- :mod:`app.review.blur` -- heads (or whole people) blurred in packet images, placed from
  the labels, the network maps and a face detector (:mod:`app.review.faces`).

Nothing here imports Qt. The submodules are imported where used, so that the command line
builds its parser without loading them; the two constants below, shared by the command line
and the app's form, are all this package itself holds.
"""

#: How a packet may carry its frames' images: none, the files as they are, with every head
#: blurred, or with every person blurred whole.
IMAGE_MODES = ("none", "full", "blurred-heads", "blurred-people")

#: What a packet carries unless told otherwise, on the command line and in the app alike:
#: frames of people are personal data, and blurred heads are enough to review poses.
DEFAULT_IMAGES = "blurred-heads"
