"""Pure numpy computations on poses: training targets, grouping and similarity.

- :mod:`app.analysis.targets` -- confidence maps, part affinity fields and loss masks on the
  target grid (Cao et al., CVPR 2017, Sec. 2.2-2.3).
- :mod:`app.analysis.association` -- peak finding, the PAF line integral and grouping of
  parts into people (Cao et al., CVPR 2017, Sec. 2.4).
- :mod:`app.analysis.similarity` -- COCO object keypoint similarity (OKS), matching people
  between two sets of labels, per-joint disagreement.
- :mod:`app.analysis.tracks` -- linking the people of consecutive frames into tracks (OKS
  against each track's predicted pose, optimal assignment, gaps bridged).

Arrays in, arrays out: nothing here reads files, touches the store or imports Qt.
"""
