"""How people and joints are written: the tag the Canvas shows, the stable id, joint names.

The rule (our own): a person's tag is its 1-based place in the frame's list of people in the
project's order, the order the Canvas numbers them in; the joint names come from the skeleton.
"""

from app.model.naming import Names, join_words, joint_name, person_text, tags
from app.model.skeleton import coco_body, skeleton_from_dict

SK = coco_body()


def test_tags_follow_the_order_of_the_frames_people():
    assert tags([49, 7, 12]) == {49: 1, 7: 2, 12: 3}
    names = Names.of_frame(SK, [49, 7, 12])
    assert [names.tag(p) for p in (49, 7, 12, 99)] == [1, 2, 3, None]


def test_a_person_is_written_by_tag_then_id():
    names = Names.of_frame(SK, [3, 49])
    assert names.person(49) == "person 2"
    assert names.person(49, with_id=True) == "person 2 (#49)"
    assert names.person(77) == "person #77"  # not in the frame: only the id says who
    assert person_text(5, 49) == "person 5 (#49)"


def test_joints_are_written_with_the_skeletons_names():
    names = Names.of_frame(SK, [3])
    assert joint_name(SK, SK.index("right_ankle")) == "right ankle"
    assert names.whose(3, SK.index("left_wrist")) == "person 1's left wrist"
    assert names.joints([9, 7, 5]) == "left wrist, left elbow and left shoulder"
    assert names.joints([1, 2, 0]) == "eyes and nose"  # both sides: once, in the plural
    assert join_words([]) == "" and join_words(["nose", "neck"]) == "nose and neck"


def test_a_custom_skeleton_names_its_own_joints():
    sk = skeleton_from_dict({"name": "hand", "joints": [{"name": "wrist_root", "sigma": 0.03},
                                                         {"name": "thumb_tip", "sigma": 0.03}],
                             "limbs": [["wrist_root", "thumb_tip"]]})
    assert Names.of_frame(sk, [1]).joints([0, 1]) == "wrist root and thumb tip"
